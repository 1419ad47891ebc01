"""Reading a replication settings file (TOML), with every problem named by its line.

The settings in force are a record of the evidence base (``exposhift method show``); this module
checks the text before it is stored (``exposhift method set settings FILE``), when it is used
for one run (``--settings FILE``), and when stored text is read back. The checks:

- TOML syntax (the line and column come from ``tomllib``);
- only the tables ``[thresholds]`` and ``[regions]``, and only the known thresholds (a renamed
  one says what replaced it);
- each threshold on its own against the rules of
  :class:`~exposhift.replication.settings.ReplicationSettings` (whole numbers, ranges, choices),
  so that a value of the wrong type or out of range is reported with the line it is written on;
- each region a list of ISO 3166-1 alpha-3 codes (three letters).

All problems of a file are reported together in one :class:`~exposhift.errors.ConfigError`;
nothing is stored when there is one.
"""

from __future__ import annotations

import re
import tomllib
from dataclasses import fields
from typing import Any

from exposhift.appraisal.toml_lines import TomlLines
from exposhift.errors import ConfigError
from exposhift.replication.regions import M49_REGIONS
from exposhift.replication.settings import DEFAULTS, ReplicationSettings

__all__ = ["settings_from_bytes"]

_AT = re.compile(r"^(?P<msg>.*?)\s*\(at line (?P<line>\d+), column (?P<col>\d+)\)$", re.S)
_ALPHA3 = re.compile(r"^[A-Za-z]{3}$")
TABLES = ("thresholds", "regions")
RENAMED = {
    "min_years_apart": "min_months_apart (months, e.g. 12)",
    "concordance_needs_significance": "nothing: an event now always counts only when "
    "significant, or when the pooled estimate of the good events excludes no effect "
    "(docs/replication.md)",
}


def _known() -> set[str]:
    return {f.name for f in fields(ReplicationSettings)} - {"regions"}


def _decode(data: bytes, label: str) -> str:
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    try:
        return data.decode("utf-8").replace("\r\n", "\n").replace("\r", "\n")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise ConfigError(
            f"{label}, line {line}: the file is not UTF-8 text; save it as UTF-8"
        ) from None


def _parse(text: str, label: str) -> dict[str, Any]:
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        m = _AT.match(str(exc))
        if m:
            where, problem = f"line {m['line']}, column {m['col']}", m["msg"]
        else:
            where = f"line {TomlLines(text).last_line}"
            problem = str(exc).replace(" (at end of document)", "")
        raise ConfigError(
            f"{label}, {where}: TOML syntax error: {problem}; fix the file there and try again"
        ) from None


def _one_threshold(name: str, value: Any) -> str | None:
    """The problem with one threshold on its own (None when it is fine)."""
    if name == "supporting_families":
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            return "supporting_families must be a list of design family names"
        value = tuple(value)
    try:
        DEFAULTS.with_(**{name: value})
    except ConfigError as exc:
        return str(exc).removeprefix("replication settings: ")
    return None


def settings_from_bytes(data: bytes, label: str) -> ReplicationSettings:
    """Check settings text and return the settings; ``label`` names the source in errors.

    Raises :class:`ConfigError` listing every problem with its line.
    """
    text = _decode(data, label)
    raw = _parse(text, label)
    lines = TomlLines(text)
    problems: list[str] = []

    def at(path: tuple, message: str) -> None:
        problems.append(f"{label}, line {lines.line_of(path)}: {message}")

    for table in raw:
        if table not in TABLES:
            at(
                (table,),
                f"unknown table or key '{table}'; a settings file has [thresholds] and [regions]",
            )
    thresholds = raw.get("thresholds", {})
    if not isinstance(thresholds, dict):
        at(("thresholds",), "thresholds must be a table ([thresholds])")
        thresholds = {}
    known = _known()
    for name, value in thresholds.items():
        if name in RENAMED:
            at(("thresholds", name), f"setting {name} was replaced; use {RENAMED[name]}")
        elif name not in known:
            at(
                ("thresholds", name),
                f"unknown setting '{name}' in [thresholds]; known: {', '.join(sorted(known))}",
            )
        else:
            problem = _one_threshold(name, value)
            if problem:
                at(("thresholds", name), problem)
    regions_raw = raw.get("regions", {})
    if not isinstance(regions_raw, dict):
        at(("regions",), "regions must be a table ([regions])")
        regions_raw = {}
    regions = dict(M49_REGIONS)
    for name, codes in regions_raw.items():
        if not isinstance(codes, list) or not all(
            isinstance(c, str) and _ALPHA3.match(c) for c in codes
        ):
            at(("regions", name), f"region '{name}' must be a list of ISO alpha-3 codes")
            continue
        regions[str(name).lower()] = tuple(sorted(c.upper() for c in codes))
    if problems:
        raise ConfigError("; ".join(problems) + "; nothing was stored or used")
    values = dict(thresholds)
    if "supporting_families" in values:
        values["supporting_families"] = tuple(values["supporting_families"])
    try:
        return ReplicationSettings(**values, regions=regions)
    except ConfigError as exc:  # a combination no single value shows (none today)
        raise ConfigError(f"{label}: {exc}") from None
