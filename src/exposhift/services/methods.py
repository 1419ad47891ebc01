"""Which method files are in force here (the appraisal rubric, the replication thresholds) and
how a committee changes them: what ``exposhift init`` tells a new workspace.

Both files change results, so a committee needs to know where they are: the rubric's hash is
recorded with every appraisal, and every replication and gap report names its thresholds.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import exposhift
from exposhift.appraisal.rubric import WORKSPACE_RUBRIC, default_rubric_path, packaged_rubric_path
from exposhift.replication.settings import WORKSPACE_SETTINGS


@dataclass(frozen=True)
class MethodFile:
    what: str  # "rubric" or "thresholds"
    path: str | None  # the file in force; None: the built-in defaults
    workspace: bool  # True: the workspace copy (./evidence/...), the committee's own
    how_to_change: str


def _repo_settings() -> Path:
    return Path(exposhift.__file__).resolve().parents[2] / "evidence" / "replication.toml"


def methods_in_force(cwd: Path | None = None) -> list[MethodFile]:
    """The rubric and the replication thresholds used by commands run in ``cwd``."""
    cwd = cwd or Path.cwd()
    rubric = default_rubric_path()
    own = rubric != packaged_rubric_path()
    if own:
        how = (
            f"edit {WORKSPACE_RUBRIC}; appraisals made under the old text keep its hash, new "
            "ones get the new hash (appraise import --rubric FILE uses another file)"
        )
    else:
        how = (
            f"mkdir -p evidence && cp {rubric} {WORKSPACE_RUBRIC}, then edit "
            f"{WORKSPACE_RUBRIC}: commands run from this folder use it"
        )
    out = [MethodFile("rubric", str(rubric), own, how)]
    local = cwd / WORKSPACE_SETTINGS
    if local.is_file():
        out.append(
            MethodFile(
                "thresholds",
                str(WORKSPACE_SETTINGS),
                True,
                f"edit {WORKSPACE_SETTINGS} (replication and gaps take --settings "
                "FILE for another); the rules are in docs/replication.md",
            )
        )
    else:
        template = _repo_settings()
        src = (
            f"cp {template} {WORKSPACE_SETTINGS}"
            if template.is_file()
            else f"write {WORKSPACE_SETTINGS} with the [thresholds] of docs/replication.md"
        )
        out.append(
            MethodFile(
                "thresholds",
                None,
                False,
                f"mkdir -p evidence && {src}, then edit it (the rules are in docs/replication.md)",
            )
        )
    return out
