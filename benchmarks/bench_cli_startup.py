"""Start-up cost of the command line against the cost of importing pandas.

Runs, each in a fresh process, ``exposhift --help``, ``exposhift --version``,
``exposhift pool --help`` (a command's help), ``exposhift --db DEMO info`` and ``info --json`` on
the demo evidence base, and the baseline
``python -c "import pandas"``; reports the CPU time (user + system, of the child process, from
``resource.getrusage(RUSAGE_CHILDREN)``) of each as the median of --repeat runs, and its ratio
to the baseline. CPU time rather than wall time: the machine is shared, and waiting for a core
is not start-up work.

Targets (issues 14 and 10): --help, --version and a command's --help <= 1.2x the baseline,
info <= 2x.

Usage: python benchmarks/bench_cli_startup.py [--repeat 7] [--db demo/evidence-demo.db]
(builds the demo in a temporary folder when --db is not given)
"""

from __future__ import annotations

import argparse
import resource
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

TARGETS = {"--help": 1.2, "--version": 1.2, "pool --help": 1.2, "info": 2.0, "info --json": 2.0}


def cpu_seconds(cmd: list[str]) -> float:
    """CPU time (user + system) of one run of ``cmd`` in a child process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def median_cpu(cmd: list[str], repeat: int) -> float:
    cpu_seconds(cmd)  # warm the file cache and the bytecode cache
    return statistics.median(cpu_seconds(cmd) for _ in range(repeat))


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=7)
    parser.add_argument("--db", type=Path, default=None)
    args = parser.parse_args()
    script = Path(sys.executable).with_name("exposhift")  # the installed entry point
    if not script.is_file():
        raise SystemExit(f"no exposhift script next to {sys.executable}; pip install -e . first")
    cli = [str(script)]
    with tempfile.TemporaryDirectory() as tmp:
        db = args.db
        if db is None:
            db = Path(tmp) / "demo.db"
            subprocess.run([*cli, "demo", "--db", str(db)], check=True, stdout=subprocess.DEVNULL)
        base = median_cpu([sys.executable, "-c", "import pandas"], args.repeat)
        print(
            f"baseline  python -c 'import pandas'  {base * 1000:7.0f} ms CPU (median of "
            f"{args.repeat})"
        )
        runs = {
            "--help": [*cli, "--help"],
            "--version": [*cli, "--version"],
            "pool --help": [*cli, "pool", "--help"],
            "info": [*cli, "--db", str(db), "info"],
            "info --json": [*cli, "--db", str(db), "info", "--json"],
        }
        failed = False
        for name, cmd in runs.items():
            t = median_cpu(cmd, args.repeat)
            ratio = t / base
            ok = ratio <= TARGETS[name]
            failed |= not ok
            print(
                f"exposhift {name:<12} {t * 1000:7.0f} ms CPU  {ratio:5.2f}x baseline  "
                f"(target <= {TARGETS[name]}x: {'met' if ok else 'NOT met'})"
            )
    return 1 if failed else 0


if __name__ == "__main__":
    raise SystemExit(main())
