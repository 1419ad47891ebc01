"""How ``--help`` reads: plain metavars (FILE, TEXT, INTEGER; none for flags), no braces around
arguments, and paragraphs that the terminal wraps rather than the source file.

Typer's defaults show ``<bool>`` beside every flag, ``<str>`` beside every option and ``{file}``
for an argument, and keep the line breaks of a docstring inside a sentence. The command and
group classes here fix that at the moment help is shown; nothing else about parsing changes.
Only ``typer`` is imported (the help of every command must stay fast).
"""

from __future__ import annotations

import re
from typing import Any

import typer
from typer.core import TyperArgument, TyperCommand, TyperGroup

#: typer's type label -> the metavar shown
_METAVARS = {
    "str": "TEXT",
    "int": "INTEGER",
    "float": "NUMBER",
    "path": "PATH",
    "file": "FILE",
    "directory": "DIR",
}


def join_paragraphs(text: str | None) -> str | None:
    """Help text with the line breaks inside each paragraph removed (paragraphs stay apart).

    A paragraph starting with ``Example`` keeps its lines: one command per line.
    """
    if not text:
        return text
    lines = text.expandtabs().splitlines()
    indent = min((len(x) - len(x.lstrip()) for x in lines[1:] if x.strip()), default=0)
    body = "\n".join([lines[0].strip(), *(x[indent:] for x in lines[1:])]).strip()
    out = []
    for para in re.split(r"\n\s*\n", body):
        if para.lstrip().startswith("Example"):
            out.append("\n".join(x.rstrip() for x in para.splitlines()))
        else:
            out.append(" ".join(x.strip() for x in para.splitlines()))
    return "\n\n".join(out)


def _metavar(param: Any, ctx: Any) -> str:
    if getattr(param, "is_flag", False) or getattr(param, "count", False):
        return ""
    if isinstance(param, TyperArgument):
        return (param.name or "value").upper()
    label = param.display_type(ctx).strip("<>")
    label = re.sub(r"^list\[(.*)\]$", r"\1", label)
    if "|" in label:  # a choice: show the accepted values
        return f"[{label}]"
    return _METAVARS.get(label, label.upper())


def tidy_params(command: Any, ctx: Any) -> None:
    """Give every parameter (and the help option) a plain metavar, once."""
    for param in command.get_params(ctx):
        if param.metavar is None:
            param.metavar = _metavar(param, ctx)
        if isinstance(param, TyperArgument):  # the name (FILE) says it; no "<path>" beside it
            param.display_type_rich = _no_type


def _no_type(ctx: Any = None) -> None:
    return None


def _usage(pieces: list[str]) -> list[str]:
    return [re.sub(r"^\{(.*)\}(\.\.\.)?$", r"\1\2", p) for p in pieces]


class Command(TyperCommand):
    """A typer command whose help follows the rules above."""

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        kwargs["help"] = join_paragraphs(kwargs.get("help"))
        super().__init__(*args, **kwargs)

    def format_help(self, ctx: Any, formatter: Any) -> None:
        tidy_params(self, ctx)
        return super().format_help(ctx, formatter)

    def collect_usage_pieces(self, ctx: Any) -> list[str]:
        tidy_params(self, ctx)
        return _usage(super().collect_usage_pieces(ctx))


class Group(TyperGroup):
    """A typer group (the main command, ``appraise``, ``events``) with the same help rules."""

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        kwargs["help"] = join_paragraphs(kwargs.get("help"))
        super().__init__(*args, **kwargs)

    def format_help(self, ctx: Any, formatter: Any) -> None:
        tidy_params(self, ctx)
        return super().format_help(ctx, formatter)

    def collect_usage_pieces(self, ctx: Any) -> list[str]:
        tidy_params(self, ctx)
        return _usage(super().collect_usage_pieces(ctx))


def use_plain_help(app: typer.Typer) -> None:
    """Make every command and group of ``app`` (recursively) use :class:`Command`/:class:`Group`."""
    for info in app.registered_commands:
        if info.cls in (None, TyperCommand):
            info.cls = Command
    for group in app.registered_groups:
        if group.typer_instance is not None:
            use_plain_help(group.typer_instance)
