"""The import rules between the layers of exposhift, checked on the source tree (ast).

- only ``store/`` imports sqlalchemy, sqlmodel, sqlite3 or alembic;
- only ``app/`` imports streamlit;
- the pure packages (synthesis, replication, appraisal, io, series) import nothing of
  services, store, cli, dossier or the dashboard.

Every import counts, also one inside a function. ``tests/test_layers.py`` runs the check on the
repository and on a planted violation (the test of the test).
"""

from __future__ import annotations

import ast
from dataclasses import dataclass
from pathlib import Path

DATABASE_LIBRARIES = ("sqlalchemy", "sqlmodel", "sqlite3", "alembic")
DASHBOARD_LIBRARIES = ("streamlit",)
PURE_PACKAGES = ("synthesis", "replication", "appraisal", "io", "series")
NOT_FOR_PURE = ("exposhift.services", "exposhift.store", "exposhift.cli", "exposhift.dossier")


@dataclass(frozen=True)
class Violation:
    file: str
    line: int
    module: str
    rule: str

    def __str__(self) -> str:
        return f"{self.file}:{self.line}: imports {self.module} ({self.rule})"


def imported_modules(source: str, filename: str) -> list[tuple[int, str]]:
    """Every module a file imports (absolute names), with its line."""
    tree = ast.parse(source, filename=filename)
    found: list[tuple[int, str]] = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(node.lineno, a.name) for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            found.append((node.lineno, node.module))
            found += [(node.lineno, f"{node.module}.{a.name}") for a in node.names]
    return found


def _top(module: str, names: tuple[str, ...]) -> bool:
    return module.split(".")[0] in names


def _within(module: str, prefixes: tuple[str, ...]) -> bool:
    return any(module == p or module.startswith(p + ".") for p in prefixes)


def check_tree(root: Path) -> list[Violation]:
    """The layer violations under ``root`` (a checkout: ``src/exposhift/`` and ``app/``)."""
    package = root / "src" / "exposhift"
    files = sorted(package.rglob("*.py")) + sorted((root / "app").rglob("*.py"))
    out: list[Violation] = []
    for path in files:
        rel = path.relative_to(root).as_posix()
        in_package = path.is_relative_to(package)
        part = path.relative_to(package).parts[0] if in_package else "app"
        for line, module in imported_modules(path.read_text(encoding="utf-8"), rel):
            if part != "store" and _top(module, DATABASE_LIBRARIES):
                out.append(Violation(rel, line, module, "only store/ talks to the database"))
            if part != "app" and _top(module, DASHBOARD_LIBRARIES):
                out.append(Violation(rel, line, module, "only app/ imports streamlit"))
            if in_package and part in PURE_PACKAGES and _within(module, NOT_FOR_PURE):
                out.append(Violation(rel, line, module, f"{part}/ is pure computation"))
    # one entry per (file, line, rule): ``from a import b`` also lists ``a.b``
    unique = {(v.file, v.line, v.rule): v for v in out}
    return list(unique.values())
