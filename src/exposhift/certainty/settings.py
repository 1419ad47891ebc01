"""The committee's certainty settings: starting level, decision threshold, rating thresholds.

The packaged default is ``src/exposhift/data/certainty.toml`` (every value with what it means
and where it comes from). :func:`load_certainty_settings` is a pure function of the file it is
given (or the packaged default): it reads nothing else, so the evidence base can store the text
as part of its method and get the same settings back. Every problem names the file and line and
says what to write instead; nothing is half-loaded.

:func:`CertaintySettings.fingerprint` (SHA-256 of the values) is recorded with every suggestion
and judgement, so a rating always says which settings it was made with.
"""

from __future__ import annotations

import hashlib
import json
import tomllib
from dataclasses import asdict, dataclass
from importlib import resources
from pathlib import Path
from typing import Any

from exposhift.appraisal.toml_lines import TomlLines
from exposhift.certainty.domains import LEVELS
from exposhift.errors import ConfigError

PACKAGED = "certainty.toml"

#: (table, key) -> dataclass field, type, check, what to write
_SPEC: dict[tuple[str, str], str] = {
    ("start", "level"): "start_level",
    ("start", "why"): "start_why",
    ("start", "max_steps_up"): "max_steps_up",
    ("imprecision", "decision_ratio"): "decision_ratio",
    ("imprecision", "decision_difference"): "decision_difference",
    ("bias", "weak_level"): "bias_weak_level",
    ("bias", "weight_share"): "bias_weight_share",
    ("bias", "weight_share_two"): "bias_weight_share_two",
    ("bias", "unappraised_as_weak"): "unappraised_as_weak",
    ("inconsistency", "alpha_q"): "inconsistency_alpha_q",
    ("indirectness", "domain"): "indirectness_domain",
    ("indirectness", "weak_level"): "indirectness_weak_level",
    ("indirectness", "weight_share"): "indirectness_weight_share",
    ("small_study", "min_events"): "small_study_min_events",
    ("small_study", "alpha"): "small_study_alpha",
    ("large_effect", "ratio"): "large_ratio",
    ("large_effect", "ratio_two"): "large_ratio_two",
}


@dataclass(frozen=True)
class CertaintySettings:
    """Values of ``certainty.toml`` (see the file for what each means)."""

    start_level: str
    start_why: str
    max_steps_up: int
    decision_ratio: float
    decision_difference: float
    bias_weak_level: int
    bias_weight_share: float
    bias_weight_share_two: float
    unappraised_as_weak: bool
    inconsistency_alpha_q: float
    indirectness_domain: str
    indirectness_weak_level: int
    indirectness_weight_share: float
    small_study_min_events: int
    small_study_alpha: float
    large_ratio: float
    large_ratio_two: float
    source: str = "packaged default"

    def values(self) -> dict[str, Any]:
        """The settings as recorded with every output (without where they were read from)."""
        d = asdict(self)
        d.pop("source")
        return d

    def fingerprint(self) -> str:
        """SHA-256 of the values (sorted JSON): which settings a rating was made with."""
        text = json.dumps(self.values(), sort_keys=True, ensure_ascii=False)
        return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _number(v: Any) -> bool:
    return isinstance(v, int | float) and not isinstance(v, bool)


def _whole(v: Any) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def _share(v: Any) -> bool:
    return _number(v) and 0.0 < float(v) <= 1.0


def _alpha(v: Any) -> bool:
    return _number(v) and 0.0 < float(v) < 1.0


def _ratio(v: Any) -> bool:
    return _number(v) and float(v) > 1.0


#: field -> (check, what to write)
_CHECKS: dict[str, tuple[Any, str]] = {
    "start_level": (lambda v: v in LEVELS, f"one of {', '.join(map(repr, LEVELS))}"),
    "start_why": (
        lambda v: isinstance(v, str) and bool(v.strip()),
        "a sentence saying why the evidence starts at this level",
    ),
    "max_steps_up": (lambda v: _whole(v) and 0 <= v <= 3, "a whole number of steps, 0 to 3"),
    "decision_ratio": (
        lambda v: _ratio(v) and float(v) < 10.0,
        "a ratio above 1 and below 10 on the ratio scale (e.g. 1.1 for 10 %; not a percent, "
        "not a log ratio, not below 1: its inverse is used for effects below 1)",
    ),
    "decision_difference": (
        lambda v: _number(v) and float(v) >= 0.0,
        "a difference of 0 or more on the measure's own scale (0: none set); the threshold is "
        "a distance from no effect, so it is never negative",
    ),
    "bias_weak_level": (lambda v: _whole(v) and 0 <= v <= 2, "a rubric level 0, 1 or 2"),
    "bias_weight_share": (_share, "a share above 0 and at most 1 (e.g. 0.5)"),
    "bias_weight_share_two": (_share, "a share above 0 and at most 1 (e.g. 0.8)"),
    "unappraised_as_weak": (lambda v: isinstance(v, bool), "true or false"),
    "inconsistency_alpha_q": (_alpha, "a significance level between 0 and 1 (e.g. 0.10)"),
    "indirectness_domain": (
        lambda v: isinstance(v, str) and bool(v.strip()),
        "the key of a rubric domain (e.g. applicability)",
    ),
    "indirectness_weak_level": (lambda v: _whole(v) and 0 <= v <= 2, "a rubric level 0, 1 or 2"),
    "indirectness_weight_share": (_share, "a share above 0 and at most 1 (e.g. 0.5)"),
    "small_study_min_events": (lambda v: _whole(v) and v >= 3, "a whole number of 3 or more"),
    "small_study_alpha": (_alpha, "a significance level between 0 and 1 (e.g. 0.10)"),
    "large_ratio": (_ratio, "a ratio above 1 (e.g. 2)"),
    "large_ratio_two": (_ratio, "a ratio above 1 (e.g. 5)"),
}


def certainty_settings_from_text(text: str, source: str = "certainty.toml") -> CertaintySettings:
    """Settings from the text of a ``certainty.toml``; every problem at once, with its line."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{source}: not valid TOML ({exc}); fix the file") from None
    lines = TomlLines(text)
    problems: list[str] = []
    values: dict[str, Any] = {}
    known_tables = {t for t, _ in _SPEC}
    for table, content in data.items():
        if table not in known_tables or not isinstance(content, dict):
            problems.append(
                f"line {lines.line_of((table,))}: unknown table [{table}]; the tables are "
                + ", ".join(f"[{t}]" for t in sorted(known_tables))
            )
            continue
        for key in content:
            if (table, key) not in _SPEC:
                known = sorted(k for t, k in _SPEC if t == table)
                problems.append(
                    f"line {lines.line_of((table, key))}: unknown setting {table}.{key}; "
                    f"[{table}] has {', '.join(known)}"
                )
    for (table, key), name in _SPEC.items():
        where = f"line {lines.line_of((table, key))}"
        if not isinstance(data.get(table), dict) or key not in data[table]:
            problems.append(f"{where}: {table}.{key} is missing; write {_CHECKS[name][1]}")
            continue
        value = data[table][key]
        check, what = _CHECKS[name]
        if not check(value):
            problems.append(f"{where}: {table}.{key} = {value!r} is not valid; write {what}")
            continue
        values[name] = float(value) if _number(value) and not _whole(value) else value
    for name in ("decision_ratio", "decision_difference", "large_ratio", "large_ratio_two"):
        if name in values:
            values[name] = float(values[name])
    if not problems:
        if values["large_ratio_two"] < values["large_ratio"]:
            problems.append(
                f"line {lines.line_of(('large_effect', 'ratio_two'))}: large_effect.ratio_two "
                f"({values['large_ratio_two']}) is below large_effect.ratio "
                f"({values['large_ratio']}); the two-step threshold must be the larger"
            )
        if values["bias_weight_share_two"] < values["bias_weight_share"]:
            problems.append(
                f"line {lines.line_of(('bias', 'weight_share_two'))}: bias.weight_share_two is "
                "below bias.weight_share; the two-step share must be the larger"
            )
    if problems:
        raise ConfigError(f"{source}: " + "; ".join(problems) + "; nothing was loaded")
    return CertaintySettings(**values, source=source)


def packaged_text() -> str:
    """The text of the packaged default ``certainty.toml``."""
    return (resources.files("exposhift") / "data" / PACKAGED).read_text(encoding="utf-8")


def load_certainty_settings(path: Path | str | None = None) -> CertaintySettings:
    """Settings from ``path``, or the packaged default when ``path`` is None."""
    if path is None:
        return certainty_settings_from_text(packaged_text(), "packaged certainty.toml")
    p = Path(path)
    if not p.is_file():
        raise ConfigError(
            f"certainty settings file not found: {p}; give an existing TOML file, or none for "
            "the packaged default"
        )
    return certainty_settings_from_text(p.read_text(encoding="utf-8"), str(p))
