"""The ``--json`` commands whose output is pinned byte for byte on the demo evidence base.

The golden files in ``tests/cli/golden_json/`` were captured from the program before the
service results became dataclasses (issue 10); ``test_cli_json_golden.py`` checks that every
``--json`` command still prints exactly the same bytes. Values that differ between two demo
builds by nature (audit timestamps and the hashes that cover them, temporary paths) are masked
the same way on both sides, nothing else.

Regenerate (only when a change of output is intended and reviewed):
``.venv/bin/python tests/cli/json_golden_cases.py``.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

GOLDEN = Path(__file__).with_name("golden_json")
SEEDS = Path(__file__).resolve().parents[2] / "seed_records"

PAIRS = [
    ("dravonil", "preterm birth"),
    ("corvane", "asthma emergency visits"),
    ("vellium", "mean birth weight"),
    ("dravonil", "childhood acute leukaemia"),
    ("trelomene", "elevated liver enzymes"),
]

#: (name, arguments after ``--db demo.db``); read-only on the demo evidence base
READ_ONLY: list[tuple[str, list[str]]] = [
    ("info", ["info", "--json"]),
    *[(f"list_{w}", ["list", w, "--json"]) for w in ("exposures", "outcomes", "studies", "events")],
    ("list_outcomes_vellium", ["list", "outcomes", "--exposure", "vellium", "--json"]),
    ("show_lindqvist1996", ["show", "Lindqvist1996", "--json"]),
    ("show_duarte1999", ["show", "Duarte1999", "--json"]),
    (
        "appraise_show_lindqvist1996",
        ["appraise", "show", "Lindqvist1996", "--json"],
    ),
    (
        "appraise_show_albrecht1998",
        ["appraise", "show", "Albrecht1998", "--json"],
    ),
    ("agreement", ["agreement", "--json"]),
    ("audit_verify", ["audit", "verify", "--json"]),
    ("audit_show", ["audit", "show", "--limit", "5", "--json"]),
    ("audit_show_record", ["audit", "show", "--record", "Lindqvist1996", "--json"]),
    ("direction_list", ["direction", "list", "--json"]),
    ("gaps", ["gaps", "--json"]),
    ("gaps_filtered", ["gaps", "--studied-only", "--region", "Europe", "--json"]),
    ("series_estimate_duarte1999", ["series", "estimate", "Duarte1999-asthma", "--json"]),
    (
        "series_estimate_duarte1999_h12",
        ["series", "estimate", "Duarte1999-asthma", "--horizon", "12", "--json"],
    ),
    ("import_dry_run", ["import", str(SEEDS / "evidence.csv"), "--dry-run", "--json"]),
    (
        "events_import_dry_run",
        ["events", "import", str(SEEDS / "registered_events.csv"), "--dry-run", "--json"],
    ),
    ("method_show", ["method", "show", "--json"]),
    ("method_show_rubric_history", ["method", "show", "rubric", "--history", "--json"]),
    ("users_list", ["users", "list", "--json"]),
    (
        "certainty_corvane_asthma",
        [
            "certainty",
            "--exposure",
            "corvane",
            "--outcome",
            "asthma emergency visits",
            "--json",
        ],
    ),
    ("evidence_table_dravonil", ["evidence-table", "--exposure", "dravonil", "--json"]),
    (
        "certainty_record_dry_run",
        ["certainty", "record", str(SEEDS / "judgements.csv"), "--dry-run", "--json"],
    ),
]
for _i, (_x, _o) in enumerate(PAIRS):
    _base = ["--exposure", _x, "--outcome", _o, "--json"]
    READ_ONLY += [
        (f"pool_{_i}", ["pool", *_base]),
        (f"replication_{_i}", ["replication", *_base]),
    ]
READ_ONLY += [
    (
        "pool_0_by_family",
        [
            "pool",
            "--exposure",
            "dravonil",
            "--outcome",
            "preterm birth",
            "--by",
            "design-family",
            "--json",
        ],
    ),
    (
        "pool_0_details",
        ["pool", "--exposure", "dravonil", "--outcome", "preterm birth", "--details", "--json"],
    ),
    (
        "pool_1_dl_wald",
        [
            "pool",
            "--exposure",
            "corvane",
            "--outcome",
            "asthma emergency visits",
            "--method",
            "dl",
            "--ci",
            "wald",
            "--json",
        ],
    ),
    (
        "pool_0_multilevel",
        [
            "pool",
            "--exposure",
            "dravonil",
            "--outcome",
            "preterm birth",
            "--within-event",
            "multilevel",
            "--json",
        ],
    ),
    (
        "pool_0_min_level",
        [
            "pool",
            "--exposure",
            "dravonil",
            "--outcome",
            "preterm birth",
            "--min-level",
            "2",
            "--by",
            "country",
            "--json",
        ],
    ),
    (
        "replication_0_raises",
        [
            "replication",
            "--exposure",
            "dravonil",
            "--outcome",
            "preterm birth",
            "--expected",
            "lowers",
            "--json",
        ],
    ),
]

#: commands that write: each runs on its own copy of the demo evidence base
WRITING: list[tuple[str, list[str]]] = [
    ("export_json", ["export", "out.json", "--json"]),
    (
        "export_csv_part",
        ["export", "out.csv", "--exposure", "vellium", "--with-appraisals", "--json"],
    ),
    ("series_import_again", ["series", "import", str(SEEDS / "series.csv"), "--json"]),
    ("import_again", ["import", str(SEEDS / "evidence.csv"), "--json"]),
    (
        "method_set_settings",
        [
            "method",
            "set",
            "settings",
            str(SEEDS.parent / "evidence" / "replication.toml"),
            "--json",
        ],
    ),
    (
        "direction_set",
        [
            "direction",
            "set",
            "--exposure",
            "vellium",
            "--outcome",
            "low birth weight",
            "--expect",
            "raises",
            "--why",
            "demo check",
            "--json",
        ],
    ),
]

_MASKS = [
    # times of the build or of the run: ISO-8601 with microseconds (the demo's own dates have none)
    (re.compile(r'"(\w+)": "\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d+Z"'), r'"\1": "<time>"'),
    (re.compile(r'"(prev_hash|entry_hash|head|chain_head)": "[0-9a-f]{64}"'), r'"\1": "<hash>"'),
    (re.compile(re.escape(str(SEEDS))), "<seeds>"),
]


def mask(text: str) -> str:
    """Hide what two demo builds differ in by nature (audit times and hashes, seed paths)."""
    for pattern, repl in _MASKS:
        text = pattern.sub(repl, text)
    return text


def exposhift() -> list[str]:
    return [str(Path(sys.executable).with_name("exposhift"))]


def run(folder: Path, args: list[str]) -> str:
    """One command in this process (typer's runner: the same stdout bytes, no start-up cost)."""
    from typer.testing import CliRunner

    from exposhift.cli.main import app

    here = Path.cwd()
    os.chdir(folder)
    try:
        out = CliRunner().invoke(
            app, ["--db", "demo.db", "--user", "golden", *args], env={"EXPOSHIFT_DB": None}
        )
    finally:
        os.chdir(here)
    if out.exit_code != 0:
        raise AssertionError(f"{args} exited {out.exit_code}: {out.output} {out.exception!r}")
    return mask(out.stdout)


def build_demo(folder: Path) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    env = {**os.environ, "EXPOSHIFT_USER": "demo"}
    env.pop("EXPOSHIFT_DB", None)
    subprocess.run(
        [*exposhift(), "--db", "demo.db", "demo"],
        cwd=folder,
        env=env,
        check=True,
        capture_output=True,
    )


def outputs(folder: Path) -> dict[str, str]:
    """Every case's masked stdout, run on the demo evidence base built in ``folder``."""
    got = {name: run(folder, args) for name, args in READ_ONLY}
    for name, args in WRITING:
        copy = folder / f"w_{name}"
        copy.mkdir()
        shutil.copy(folder / "demo.db", copy / "demo.db")
        got[name] = run(copy, args)
    return got


if __name__ == "__main__":
    import tempfile

    with tempfile.TemporaryDirectory() as tmp:
        build_demo(Path(tmp))
        GOLDEN.mkdir(exist_ok=True)
        for name, text in outputs(Path(tmp)).items():
            (GOLDEN / f"{name}.json").write_text(text, encoding="utf-8")
            print(f"wrote {name}.json ({len(text)} chars)")
