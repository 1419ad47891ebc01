"""Cost of signing in, and of the session check every dashboard page makes, against Argon2.

- ``sign_in`` (a name and password checked, the attempt, the session and the audit entry
  written) against the baseline argon2-cffi ``PasswordHasher().verify`` of the same hash: the
  password hash should dominate (ratio close to 1);
- ``session_identity`` (the check on every page: one read, a write at most once a minute)
  against the same baseline: it should cost a small fraction of one verification.

CPU time of this process (``time.process_time``), median of --repeat runs, on a throwaway
SQLite evidence base. Usage: python benchmarks/bench_signin.py [--repeat 7]
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path


def _cpu(fn) -> float:
    start = time.process_time()
    fn()
    return time.process_time() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=7)
    args = parser.parse_args()

    from argon2 import PasswordHasher

    from exposhift.services import accounts
    from exposhift.services.setup import init_database, open_current

    with tempfile.TemporaryDirectory() as tmp:
        db = str(Path(tmp) / "bench.db")
        init_database(db, user="bench")
        store = open_current(db, user="bench")
        try:
            accounts.add_account(store, "bench-admin", "admin", "bench-password-1")
            with store.read() as conn:
                from exposhift.store.accounts import account_row

                hashed = account_row(conn, "bench-admin")["password_hash"]
            ref = PasswordHasher()
            base = statistics.median(
                _cpu(lambda: ref.verify(hashed, "bench-password-1")) for _ in range(args.repeat)
            )
            tokens = []
            sign = statistics.median(
                _cpu(
                    lambda: tokens.append(
                        accounts.sign_in(store, "bench-admin", "bench-password-1").token
                    )
                )
                for _ in range(args.repeat)
            )
            check = statistics.median(
                _cpu(lambda: accounts.session_identity(store, tokens[-1]))
                for _ in range(args.repeat)
            )
        finally:
            store.dispose()
    rows = [
        ("baseline  argon2-cffi PasswordHasher().verify", base),
        ("sign_in", sign),
        ("session_identity (every page)", check),
    ]
    for label, cpu in rows:
        print(f"{label:<46} {cpu * 1000:7.1f} ms CPU  {cpu / base:5.3f}x baseline")


if __name__ == "__main__":
    main()
