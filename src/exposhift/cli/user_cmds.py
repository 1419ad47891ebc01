"""``exposhift users``: the accounts that sign in to the dashboard (administrators only)."""

from __future__ import annotations

import sys

import typer

from exposhift.cli.common import fail, print_json, settings, user_errors
from exposhift.cli.helptext import Group

users_app = typer.Typer(
    help="Accounts that sign in to the dashboard: add, list, change the role, disable.\n\n"
    "Roles: reader (consensus appraisals only, no writes), reviewer (own independent "
    "appraisals), editor (imports, edits, consensus), admin (accounts, full exports).\n\n"
    "Example: exposhift --user chair users add ana --role reviewer",
    no_args_is_help=True,
    cls=Group,
)

ROLE_HELP = "reader, reviewer, editor or admin."


def _password(from_stdin: bool) -> str:
    """The new password: the first line of standard input, or typed twice without echo."""
    if from_stdin:
        line = sys.stdin.readline()
        if not line:
            fail("--password-stdin: standard input is empty; pipe the password in", 2)
        return line.rstrip("\r\n")
    if not sys.stdin.isatty():
        fail(
            "no terminal to type the password on; pipe it in with --password-stdin "
            "(e.g. from a password manager), never as an argument",
            2,
        )
    import getpass

    first = getpass.getpass("New password: ")
    again = getpass.getpass("Repeat the password: ")
    if first != again:
        fail("the two passwords differ; nothing was changed. Run the command again", 2)
    return first


def _open(ctx: typer.Context):
    from exposhift.services.setup import open_current

    s = settings(ctx)
    return open_current(s.db, s.user)


def _line(a) -> str:
    state = "disabled" if a.disabled else "active"
    return f"{a.name:<24} {a.role:<9} {state:<9} since {a.created_at[:10]}"


@users_app.command("add")
@user_errors
def add(
    ctx: typer.Context,
    name: str = typer.Argument(..., help="The sign-in name (as people will type it)."),
    role: str = typer.Option(..., "--role", help=ROLE_HELP),
    password_stdin: bool = typer.Option(
        False, "--password-stdin", help="Read the password from the first line of stdin."
    ),
) -> None:
    """Add an account; the password is read without echo (or from stdin), never stored.

    Example: exposhift users add ana --role reviewer --password-stdin < ana-password.txt
    """
    from exposhift.services.accounts import add_account

    password = _password(password_stdin)
    store = _open(ctx)
    try:
        account = add_account(store, name, role, password)
    finally:
        store.dispose()
    typer.echo(f"added account '{account.name}' ({account.role})")


@users_app.command("list")
@user_errors
def list_cmd(
    ctx: typer.Context,
    as_json: bool = typer.Option(False, "--json", help="Print JSON."),
) -> None:
    """List the accounts: name, role, active or disabled (never a password or its hash).

    Example: exposhift users list --json
    """
    from exposhift.services.accounts import list_accounts

    store = _open(ctx)
    try:
        accounts = list_accounts(store)
    finally:
        store.dispose()
    if as_json:
        print_json([vars(a) for a in accounts])
        return
    if not accounts:
        typer.echo(
            "no accounts: the dashboard opens without sign-in on this machine (127.0.0.1) "
            "only; add one with 'exposhift users add NAME --role admin'"
        )
        return
    for a in accounts:
        typer.echo(_line(a))


@users_app.command("set-role")
@user_errors
def set_role_cmd(
    ctx: typer.Context,
    name: str = typer.Argument(..., help="The account's name."),
    role: str = typer.Argument(..., help=ROLE_HELP),
) -> None:
    """Give an account another role; open dashboard sessions use it from their next page.

    Example: exposhift users set-role ana editor
    """
    from exposhift.services.accounts import set_role

    store = _open(ctx)
    try:
        account = set_role(store, name, role)
    finally:
        store.dispose()
    typer.echo(f"account '{account.name}' now has the role {account.role}")


@users_app.command("disable")
@user_errors
def disable(
    ctx: typer.Context,
    name: str = typer.Argument(..., help="The account's name."),
) -> None:
    """Disable an account: it can no longer sign in and its open sessions end. Its
    appraisals and audit entries stay.

    Example: exposhift users disable ana
    """
    from exposhift.services.accounts import disable_account

    store = _open(ctx)
    try:
        account = disable_account(store, name)
    finally:
        store.dispose()
    typer.echo(f"account '{account.name}' is disabled")


@users_app.command("enable")
@user_errors
def enable(
    ctx: typer.Context,
    name: str = typer.Argument(..., help="The account's name."),
) -> None:
    """Enable a disabled account again.

    Example: exposhift users enable ana
    """
    from exposhift.services.accounts import enable_account

    store = _open(ctx)
    try:
        account = enable_account(store, name)
    finally:
        store.dispose()
    typer.echo(f"account '{account.name}' is active")


@users_app.command("set-password")
@user_errors
def set_password_cmd(
    ctx: typer.Context,
    name: str = typer.Argument(..., help="The account's name."),
    password_stdin: bool = typer.Option(
        False, "--password-stdin", help="Read the password from the first line of stdin."
    ),
) -> None:
    """Replace an account's password (read without echo, or from stdin); its open sessions
    end.

    Example: exposhift users set-password ana
    """
    from exposhift.services.accounts import set_password

    password = _password(password_stdin)
    store = _open(ctx)
    try:
        account = set_password(store, name, password)
    finally:
        store.dispose()
    typer.echo(f"password of '{account.name}' replaced; its open sessions were ended")


def register(app: typer.Typer) -> None:
    app.add_typer(users_app, name="users")
