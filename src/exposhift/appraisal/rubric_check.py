"""Check a parsed rubric file and build its parts; every problem names its line.

The layout of the file is described in ``evidence/rubric.toml`` itself. The checks here are
strict on purpose: an unknown key is usually a typo that would otherwise silently drop a rule.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any

from exposhift.appraisal.checks import CHECKS
from exposhift.appraisal.rubric_types import (
    DOMAIN_KEYS,
    LEVELS,
    DesignCriteria,
    Domain,
    LevelDef,
    ReportingDef,
    SuggestRule,
)
from exposhift.appraisal.toml_lines import Path, TomlLines
from exposhift.errors import RubricError
from exposhift.vocab import DESIGNS

_TOP = ("rubric", "scale", "reporting", "summary", "domain", "suggest")
_RUBRIC = ("id", "version", "title", "caution")
_SCALE = ("level", "key", "meaning")
_REPORTING = ("key", "label", "meaning")
_SUMMARY = ("core", "apart", "cap_trigger", "cap_at", "never_lifts", "exclude_from_pooling")
_DOMAIN = ("key", "title", "question", "core", "apart", "look_for", "level", "design")
_DOMAIN_LEVEL = ("level", "criteria")
_DESIGN = ("criteria", "minimum", "full", "checks")
_SUGGEST = (
    "id",
    "domain",
    "reason",
    "level",
    "max_level",
    "max_level_from",
    "designs",
    "comparison",
    "fewest_points_below",
    "fewest_points_at_least",
    "fewest_pre_below",
    "lacks_all",
    "lacks_any",
    "fewer_than",
)
_FACT_LIMITS = ("assignment_grade",)
_LEVEL_WORDS = "0 (fatal), 1 (weak), 2 (adequate), 3 (strong)"


class _Checker:
    def __init__(self, lines: TomlLines, label: str):
        self.lines = lines
        self.label = label

    def fail(self, path: Path, problem: str, hint: str = "") -> RubricError:
        text = f"{self.label}, line {self.lines.line_of(path)}: {problem}"
        return RubricError(f"{text}; {hint}" if hint else text)

    @staticmethod
    def name(path: Path) -> str:
        return ".".join(str(p) for p in path if isinstance(p, str)) or "top level"

    def keys(self, table: dict, allowed: tuple[str, ...], path: Path) -> None:
        for key in table:
            if key not in allowed:
                raise self.fail(
                    (*path, key),
                    f"unknown key '{key}' in [{self.name(path)}]",
                    f"accepted keys: {', '.join(allowed)}",
                )

    def table(self, parent: dict, key: str, path: Path, required: bool = True) -> dict:
        value = parent.get(key)
        if value is None and not required:
            return {}
        if not isinstance(value, dict):
            raise self.fail(
                (*path, key) if key in parent else path,
                f"[{self.name((*path, key))}] is missing or not a table",
                f"add a [{self.name((*path, key))}] table",
            )
        return value

    def tables(self, parent: dict, key: str, path: Path, required: bool = True) -> list[dict]:
        value = parent.get(key)
        if value is None and not required:
            return []
        if not isinstance(value, list) or not value or not all(isinstance(v, dict) for v in value):
            raise self.fail(
                (*path, key) if key in parent else path,
                f"'{self.name((*path, key))}' must be one or more "
                f"[[{self.name((*path, key))}]] tables",
            )
        return value

    def text(self, table: dict, key: str, path: Path, required: bool = True) -> str:
        value = table.get(key)
        if value is None and not required:
            return ""
        if not isinstance(value, str) or not value.strip():
            if key not in table:
                raise self.fail(
                    path,
                    f"[{self.name(path)}] has no '{key}'",
                    f'add {key} = "..." (text in quotes)',
                )
            raise self.fail(
                (*path, key), f"'{key}' must be non-empty text in quotes, got {value!r}"
            )
        return value.strip()

    def flag(self, table: dict, key: str, path: Path, default: bool | None = None) -> bool:
        value = table.get(key, default)
        if not isinstance(value, bool):
            if key not in table:
                raise self.fail(
                    path,
                    f"[{self.name(path)}] has no '{key}'",
                    f"add {key} = true or {key} = false",
                )
            raise self.fail((*path, key), f"'{key}' must be true or false, got {value!r}")
        return value

    def level(self, table: dict, key: str, path: Path, required: bool = True) -> int | None:
        value = table.get(key)
        if value is None and not required:
            return None
        if key not in table:
            raise self.fail(
                path,
                f"[{self.name(path)}] has no '{key}'",
                f"add {key} = a level, one of {_LEVEL_WORDS}",
            )
        if isinstance(value, bool) or not isinstance(value, int) or value not in LEVELS:
            where = "" if key == "level" else f" (in '{key}')"
            raise self.fail(
                (*path, key),
                f"level {value!r} is outside 0-3{where}",
                f"accepted levels: {_LEVEL_WORDS}",
            )
        return value

    def need_level(self, table: dict, key: str, path: Path) -> int:
        """A required level (:meth:`level` raises rather than return None)."""
        value = self.level(table, key, path, required=True)
        assert value is not None  # required=True fails instead of returning None
        return value

    def count(self, table: dict, key: str, path: Path) -> int | None:
        value = table.get(key)
        if value is None:
            return None
        if isinstance(value, bool) or not isinstance(value, int) or value < 1:
            raise self.fail(
                (*path, key), f"'{key}' must be a whole number of 1 or more, got {value!r}"
            )
        return value

    def strings(
        self,
        table: dict,
        key: str,
        path: Path,
        required: bool = False,
        accepted: tuple[str, ...] | None = None,
        what: str = "",
    ) -> tuple[str, ...]:
        value = table.get(key)
        if value is None and not required:
            return ()
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            if key not in table:
                raise self.fail(
                    path, f"[{self.name(path)}] has no '{key}'", f'add {key} = ["...", ...]'
                )
            raise self.fail((*path, key), f"'{key}' must be a list of texts in quotes")
        if accepted is not None:
            for v in value:
                if v not in accepted:
                    raise self.fail(
                        (*path, key),
                        f"unknown {what} '{v}' in '{key}'",
                        f"accepted: {', '.join(accepted)}",
                    )
        return tuple(value)


def _scale(c: _Checker, raw: dict) -> tuple[LevelDef, ...]:
    out: dict[int, LevelDef] = {}
    for i, t in enumerate(c.tables(raw, "scale", ())):
        path = ("scale", i)
        c.keys(t, _SCALE, path)
        level = c.need_level(t, "level", path)
        if level in out:
            raise c.fail((*path, "level"), f"level {level} is defined twice in [[scale]]")
        out[level] = LevelDef(level, c.text(t, "key", path), c.text(t, "meaning", path))
    missing = [lv for lv in LEVELS if lv not in out]
    if missing:
        raise c.fail(
            ("scale",),
            f"[[scale]] has no entry for level {missing[0]}",
            f"define each of {_LEVEL_WORDS}",
        )
    return tuple(out[lv] for lv in sorted(out, reverse=True))


def _reporting(c: _Checker, raw: dict) -> tuple[ReportingDef, ...]:
    out: list[ReportingDef] = []
    for i, t in enumerate(c.tables(raw, "reporting", ())):
        path = ("reporting", i)
        c.keys(t, _REPORTING, path)
        r = ReportingDef(
            c.text(t, "key", path), c.text(t, "label", path), c.text(t, "meaning", path)
        )
        if any(o.key == r.key for o in out):
            raise c.fail((*path, "key"), f"reporting key '{r.key}' is defined twice")
        out.append(r)
    return tuple(out)


def _design_criteria(c: _Checker, table: Any, path: Path) -> tuple[DesignCriteria, ...]:
    if not isinstance(table, dict):
        raise c.fail(path, "'design' must hold one [domain.design.<design code>] table per design")
    out = []
    for code, t in table.items():
        p = (*path, code)
        if code not in DESIGNS:
            raise c.fail(p, f"unknown design '{code}'", f"accepted designs: {', '.join(DESIGNS)}")
        if not isinstance(t, dict):
            raise c.fail(p, f"'design.{code}' must be a table")
        c.keys(t, _DESIGN, p)
        out.append(
            DesignCriteria(
                design=code,
                criteria=c.strings(t, "criteria", p),
                minimum=c.strings(t, "minimum", p),
                full=c.strings(t, "full", p),
                checks=c.strings(t, "checks", p, accepted=tuple(CHECKS), what="check code"),
            )
        )
    return tuple(out)


def _domains(c: _Checker, raw: dict) -> tuple[Domain, ...]:
    out: list[Domain] = []
    for i, t in enumerate(c.tables(raw, "domain", ())):
        path = ("domain", i)
        c.keys(t, _DOMAIN, path)
        key = c.text(t, "key", path)
        if key not in DOMAIN_KEYS:
            raise c.fail(
                (*path, "key"),
                f"unknown domain '{key}'",
                f"accepted domains: {', '.join(DOMAIN_KEYS)}",
            )
        for j, d in enumerate(out):
            if d.key == key:
                raise c.fail(
                    (*path, "key"),
                    f"domain '{key}' is defined twice (first at line "
                    f"{c.lines.line_of(('domain', j, 'key'))})",
                    "rename or remove one of them",
                )
        levels: dict[int, tuple[str, ...]] = {}
        for j, lt in enumerate(c.tables(t, "level", path)):
            lp = (*path, "level", j)
            c.keys(lt, _DOMAIN_LEVEL, lp)
            lv = c.need_level(lt, "level", lp)
            if lv in levels:
                raise c.fail((*lp, "level"), f"domain '{key}' defines level {lv} twice")
            crit = c.strings(lt, "criteria", lp, required=True)
            if not crit:
                raise c.fail((*lp, "criteria"), f"level {lv} of domain '{key}' has no criteria")
            levels[lv] = crit
        for lv in LEVELS:
            if lv not in levels:
                raise c.fail(
                    path,
                    f"domain '{key}' has no criteria for level {lv}",
                    f"add a [[domain.level]] table with level = {lv}",
                )
        out.append(
            Domain(
                key=key,
                title=c.text(t, "title", path),
                question=c.text(t, "question", path),
                core=c.flag(t, "core", path),
                apart=c.flag(t, "apart", path, default=False) if "apart" in t else False,
                look_for=c.strings(t, "look_for", path),
                levels=tuple((lv, levels[lv]) for lv in sorted(levels, reverse=True)),
                designs=_design_criteria(c, t["design"], (*path, "design"))
                if "design" in t
                else (),
            )
        )
    present = {d.key for d in out}
    for key in DOMAIN_KEYS:
        if key not in present:
            raise c.fail(
                ("domain", len(out) - 1),
                f"domain '{key}' is missing",
                f"every rubric defines the domains {', '.join(DOMAIN_KEYS)}; "
                f'add a [[domain]] table with key = "{key}"',
            )
    return tuple(out)


def _summary(c: _Checker, raw: dict, domains: tuple[Domain, ...]) -> dict[str, Any]:
    path: Path = ("summary",)
    t = c.table(raw, "summary", ())
    c.keys(t, _SUMMARY, path)
    keys = tuple(d.key for d in domains)
    core = c.strings(t, "core", path, required=True, accepted=keys, what="domain")
    if not core:
        raise c.fail((*path, "core"), "'core' lists no domain", "list at least one core domain")
    apart = c.strings(t, "apart", path, accepted=keys, what="domain")
    never_lifts = c.strings(t, "never_lifts", path, accepted=keys, what="domain")
    both = set(core) & set(apart)
    if both:
        raise c.fail(
            (*path, "apart"),
            f"domain '{sorted(both)[0]}' is both core and apart",
            "a domain reported apart cannot decide the overall level",
        )
    pooling = t.get("exclude_from_pooling", [0])
    if not isinstance(pooling, list) or any(
        isinstance(v, bool) or v not in LEVELS for v in pooling
    ):
        raise c.fail(
            (*path, "exclude_from_pooling"),
            f"'exclude_from_pooling' must list levels from 0-3, got {pooling!r}",
        )
    for i, d in enumerate(domains):
        if d.core != (d.key in core):
            raise c.fail(
                ("domain", i, "core"),
                f"domain '{d.key}' says core = {str(d.core).lower()} but [summary] "
                f"core {'lists' if d.key in core else 'does not list'} it",
                "make the two agree",
            )
        if "apart" in raw["domain"][i] and d.apart != (d.key in apart):
            raise c.fail(
                ("domain", i, "apart"),
                f"domain '{d.key}' says apart = {str(d.apart).lower()} but [summary] "
                f"apart {'lists' if d.key in apart else 'does not list'} it",
                "make the two agree",
            )
    return {
        "core_domains": tuple(k for k in keys if k in core),
        "apart_domains": tuple(k for k in keys if k in apart),
        "cap_trigger": c.level(t, "cap_trigger", path),
        "cap_at": c.level(t, "cap_at", path),
        "never_lifts": never_lifts,
        "exclude_from_pooling": tuple(sorted(set(pooling))),
    }


def _suggestions(c: _Checker, raw: dict, keys: tuple[str, ...]) -> tuple[SuggestRule, ...]:
    out: list[SuggestRule] = []
    checks = tuple(CHECKS)
    for i, t in enumerate(c.tables(raw, "suggest", (), required=False)):
        path = ("suggest", i)
        c.keys(t, _SUGGEST, path)
        rule_id = c.text(t, "id", path)
        if any(r.id == rule_id for r in out):
            raise c.fail((*path, "id"), f"suggestion id '{rule_id}' is used twice")
        domain = c.text(t, "domain", path)
        if domain not in keys:
            raise c.fail(
                (*path, "domain"),
                f"unknown domain '{domain}'",
                f"accepted domains: {', '.join(keys)}",
            )
        given = [k for k in ("level", "max_level", "max_level_from") if k in t]
        if len(given) != 1:
            raise c.fail(
                path,
                f"suggestion '{rule_id}' needs exactly one of level, max_level "
                f"or max_level_from (found {', '.join(given) or 'none'})",
            )
        source = t.get("max_level_from")
        if source is not None and source not in _FACT_LIMITS:
            raise c.fail(
                (*path, "max_level_from"),
                f"unknown fact '{source}'",
                f"accepted: {', '.join(_FACT_LIMITS)}",
            )
        comparison = t.get("comparison")
        if comparison is not None and not isinstance(comparison, bool):
            raise c.fail((*path, "comparison"), "'comparison' must be true or false")
        fewer = None
        if "fewer_than" in t:
            ft = t["fewer_than"]
            fp = (*path, "fewer_than")
            if not isinstance(ft, dict):
                raise c.fail(fp, "'fewer_than' must be a table { n = N, of = [check codes] }")
            c.keys(ft, ("n", "of"), fp)
            n = c.count(ft, "n", fp)
            if n is None:
                raise c.fail(fp, "'fewer_than' has no 'n'", "write fewer_than = { n = 2, ... }")
            fewer = (n, c.strings(ft, "of", fp, required=True, accepted=checks, what="check code"))
        designs = c.strings(t, "designs", path, accepted=tuple(DESIGNS), what="design")
        out.append(
            SuggestRule(
                id=rule_id,
                domain=domain,
                reason=c.text(t, "reason", path),
                level=c.level(t, "level", path, required=False),
                max_level=c.level(t, "max_level", path, required=False),
                max_level_from=source,
                designs=designs or None,
                comparison=comparison,
                fewest_points_below=c.count(t, "fewest_points_below", path),
                fewest_points_at_least=c.count(t, "fewest_points_at_least", path),
                fewest_pre_below=c.count(t, "fewest_pre_below", path),
                lacks_all=c.strings(t, "lacks_all", path, accepted=checks, what="check code"),
                lacks_any=c.strings(t, "lacks_any", path, accepted=checks, what="check code"),
                fewer_than=fewer,
            )
        )
    return tuple(out)


def build_rubric_parts(raw: dict, lines: TomlLines, label: str) -> dict[str, Any]:
    """Check ``raw`` (the parsed TOML) and return the fields of a Rubric except hash and path."""
    c = _Checker(lines, label)
    c.keys(raw, _TOP, ())
    head = c.table(raw, "rubric", ())
    c.keys(head, _RUBRIC, ("rubric",))
    version = head.get("version")
    if not isinstance(version, str):
        if "version" not in head:
            raise c.fail(("rubric",), "[rubric] has no 'version'", 'add version = "1.0"')
        raise c.fail(
            ("rubric", "version"),
            f"'version' must be text in quotes, got {version!r}",
            f'write version = "{version}"',
        )
    domains = _domains(c, raw)
    parts = {
        "rubric_id": c.text(head, "id", ("rubric",)),
        "version": c.text(head, "version", ("rubric",)),
        "title": c.text(head, "title", ("rubric",)),
        "caution": c.text(head, "caution", ("rubric",), required=False),
        "scale": _scale(c, raw),
        "reporting": _reporting(c, raw),
        "domains": domains,
        "suggestions": _suggestions(c, raw, tuple(d.key for d in domains)),
    }
    parts.update(_summary(c, raw, domains))
    apart = parts["apart_domains"]
    parts["domains"] = tuple(replace(d, apart=d.key in apart) for d in domains)
    return parts
