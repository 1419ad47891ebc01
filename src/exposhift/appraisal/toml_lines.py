"""Find the line of a key in TOML text, so that errors about a value can name its line.

``tomllib`` reports the line of a *syntax* error but returns plain dicts without positions, so a
semantic problem (a level of 4, a missing domain, an unknown key) would otherwise have no line.
:class:`TomlLines` scans the text once and maps each key path to the line where it is written:
``("domain", 2, "level", 3, "level")`` is the ``level = ...`` line of the fourth
``[[domain.level]]`` table of the third ``[[domain]]`` table. Arrays of tables count from 0 in
the order they appear, exactly as ``tomllib`` orders them.

The scanner understands what the rubric file needs: comments, ``[table]`` and ``[[array]]``
headers with dotted and quoted keys, dotted keys on the left of ``=``, and values that continue
over several lines (arrays, multi-line strings). Keys inside inline tables are not indexed; a
lookup falls back to the nearest enclosing key that is.
"""

from __future__ import annotations

import re

_BARE = re.compile(r"[A-Za-z0-9_-]+")

Path = tuple[str | int, ...]


def _parse_key(s: str, i: int = 0) -> tuple[list[str], int]:
    """Parse a (dotted, possibly quoted) key starting at ``s[i]``; return parts and end index."""
    parts: list[str] = []
    n = len(s)
    while True:
        while i < n and s[i] in " \t":
            i += 1
        if i >= n:
            break
        if s[i] == '"':
            j = i + 1
            while j < n and s[j] != '"':
                j += 2 if s[j] == "\\" else 1
            parts.append(s[i + 1 : j])
            i = j + 1
        elif s[i] == "'":
            j = s.find("'", i + 1)
            j = n if j < 0 else j
            parts.append(s[i + 1 : j])
            i = j + 1
        else:
            m = _BARE.match(s, i)
            if not m:
                break
            parts.append(m.group(0))
            i = m.end()
        while i < n and s[i] in " \t":
            i += 1
        if i < n and s[i] == ".":
            i += 1
            continue
        break
    return parts, i


class _ValueState:
    """Where a value that spans lines stands: open brackets, or inside a multi-line string."""

    def __init__(self) -> None:
        self.depth = 0
        self.string: str | None = None  # '"""' or "'''" while inside a multi-line string
        self.start_line = 0

    @property
    def open(self) -> bool:
        return self.depth > 0 or self.string is not None

    def scan(self, s: str) -> None:
        i, n = 0, len(s)
        while i < n:
            if self.string is not None:
                j = s.find(self.string, i)
                if j < 0:
                    return
                self.string = None
                i = j + 3
                continue
            c = s[i]
            if c == "#":
                return
            if s.startswith('"""', i) or s.startswith("'''", i):
                self.string = s[i : i + 3]
                i += 3
            elif c == '"':
                j = i + 1
                while j < n and s[j] != '"':
                    j += 2 if s[j] == "\\" else 1
                i = j + 1
            elif c == "'":
                j = s.find("'", i + 1)
                i = n if j < 0 else j + 1
            else:
                if c in "[{":
                    self.depth += 1
                elif c in "]}":
                    self.depth = max(0, self.depth - 1)
                i += 1


class TomlLines:
    """Line numbers (1-based) of the keys and table headers in a TOML text."""

    def __init__(self, text: str):
        self.lines: dict[Path, int] = {}
        self.duplicate_line: int | None = None  # first key written twice in the same table
        self.unclosed_line: int | None = None  # start of a value still open at the end
        self.last_line = max(1, len(text.splitlines()))
        arrays: dict[Path, int] = {}  # array-of-tables path -> number of elements so far
        current: Path = ()
        value = _ValueState()

        def resolve(parts: list[str]) -> Path:
            path: Path = ()
            for part in parts:
                path = (*path, part)
                if path in arrays:
                    path = (*path, arrays[path] - 1)
            return path

        for number, raw in enumerate(text.splitlines(), start=1):
            if value.open:
                value.scan(raw)
                continue
            s = raw.strip()
            if not s or s.startswith("#"):
                continue
            if s.startswith("[["):
                parts, _ = _parse_key(s, 2)
                if parts:
                    parent = resolve(parts[:-1])
                    base = (*parent, parts[-1])
                    index = arrays.get(base, 0)
                    arrays[base] = index + 1
                    current = (*base, index)
                    self.lines.setdefault(base, number)
                    self.lines[current] = number
                continue
            if s.startswith("["):
                parts, _ = _parse_key(s, 1)
                if parts:
                    current = resolve(parts)
                    self.lines.setdefault(current, number)
                continue
            parts, end = _parse_key(s)
            if parts and end < len(s) and s[end] == "=":
                key = (*current, *parts)
                if key in self.lines and self.duplicate_line is None:
                    self.duplicate_line = number
                self.lines.setdefault(key, number)
                value.start_line = number
                value.scan(s[end + 1 :])
        if value.open:
            self.unclosed_line = value.start_line

    def line_of(self, path: Path) -> int:
        """Line of ``path`` or of its nearest enclosing key or table; 1 when nothing matches."""
        path = tuple(path)
        while path:
            if path in self.lines:
                return self.lines[path]
            path = path[:-1]
        return 1
