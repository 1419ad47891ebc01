"""One opened evidence base: the store, the method it records, and who is working.

``open_workspace(db, user)`` opens the store once (refusing a schema older or newer than this
program), reads the method in force from the evidence base and checks it, and closes the store
when the block ends::

    with open_workspace(db, user, overrides={"rubric": path}) as ws:
        pool_evidence(ws.store, ..., rubric=ws.method.rubric)

Nothing is read from the working folder. ``overrides`` names files used for this run only
(``--rubric FILE`` / ``--settings FILE``); :attr:`MethodInForce.override_notes` says so, and
every command prints it. Also here: recording the packaged defaults of parts an evidence base
does not hold yet (``exposhift init``), and storing a new version (``exposhift method set``).
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from exposhift.errors import ConfigError
from exposhift.method.parts import METHOD_PARTS, content_hash, part
from exposhift.store.database import Store
from exposhift.store.method_records import (
    StoredVersion,
    add_method_version,
    latest_versions,
    method_versions,
)

CAUTION = (
    "The method (rubric and thresholds) decides which studies count; a committee changes it "
    "deliberately, and results support, never replace, expert judgement, local regulation and "
    "licensed practice."
)


@dataclass(frozen=True)
class PartInForce:
    """One part of the method as used by this run."""

    name: str
    value: Any  # the checked object (Rubric, ReplicationSettings, ...)
    content_hash: str
    declared: str
    number: int | None  # the stored version; None: not stored (see ``source``)
    source: str
    created_by: str | None = None
    created_at: str | None = None
    override: str | None = None  # the file of a one-run override

    def to_dict(self) -> dict[str, Any]:
        return {
            "part": self.name,
            "number": self.number,
            "content_hash": self.content_hash,
            "declared": self.declared,
            "source": self.source,
            "created_by": self.created_by,
            "created_at": self.created_at,
            "one_run_override": self.override,
        }


@dataclass(frozen=True)
class MethodInForce:
    parts: dict[str, PartInForce]

    def __getitem__(self, name: str) -> Any:
        return self.parts[name].value

    @property
    def rubric(self):
        return self["rubric"]

    @property
    def settings(self):
        return self["settings"]

    @property
    def override_notes(self) -> list[str]:
        """``one-run override: ...`` lines, one per overridden part (empty when none)."""
        out = []
        for p in self.parts.values():
            if p.override is not None:
                stored = f"version {p.number}" if p.number is not None else "its packaged default"
                out.append(
                    f"one-run override: {p.name} from {p.override} (hash {p.content_hash[:12]}) "
                    f"instead of the evidence base's {stored}; nothing was stored"
                )
        return out

    def to_dict(self) -> dict[str, Any]:
        return {name: p.to_dict() for name, p in self.parts.items()}

    def used(self) -> dict[str, dict[str, Any]]:
        """Per part, what a result records of the method that produced it: the stored version
        number (None when not stored), the content hash, the version the text declares and the
        file of a one-run override (None when none)."""
        return {
            name: {
                "number": p.number,
                "content_hash": p.content_hash,
                "declared": p.declared,
                "one_run_override": p.override,
            }
            for name, p in self.parts.items()
        }

    def words(self) -> str:
        """The parts in one phrase: ``rubric version 1 (1a2b3c4d5e6f), settings ...``."""
        out = []
        for name, p in self.parts.items():
            which = (
                f"file {p.override}"
                if p.override is not None
                else (f"version {p.number}" if p.number is not None else "packaged default")
            )
            out.append(f"{name} {which} ({p.content_hash[:12]})")
        return ", ".join(out)


@dataclass
class Workspace:
    store: Store
    method: MethodInForce
    user: str = field(default="")

    @property
    def overrides(self) -> list[str]:
        return self.method.override_notes


def _from_stored(v: StoredVersion) -> PartInForce:
    mp = part(v.part)
    label = f"{v.part} version {v.number} stored in the evidence base"
    return PartInForce(
        name=v.part,
        value=mp.parse(v.text.encode("utf-8"), label),
        content_hash=v.content_hash,
        declared=v.declared,
        number=v.number,
        source=v.source,
        created_by=v.created_by,
        created_at=v.created_at,
    )


def _from_file(name: str, file: str | Path, stored: PartInForce | None) -> PartInForce:
    mp = part(name)
    path = Path(file)
    data = _read(path, mp.title)
    value = mp.parse(data, str(path))
    return PartInForce(
        name=name,
        value=value,
        content_hash=content_hash(data),
        declared=mp.declared_version(value),
        number=stored.number if stored else None,
        source=f"file {path}",
        override=str(path),
    )


def _packaged(name: str) -> PartInForce:
    mp = part(name)
    data = mp.packaged_bytes()
    value = mp.parse(data, str(mp.packaged()))
    return PartInForce(
        name=name,
        value=value,
        content_hash=content_hash(data),
        declared=mp.declared_version(value),
        number=None,
        source="packaged default (not stored in this evidence base yet: run 'exposhift init')",
    )


def _read(path: Path, title: str) -> bytes:
    if not path.is_file():
        raise ConfigError(f"{title} file not found: {path}; give the path of an existing file")
    try:
        return path.read_bytes()
    except OSError as exc:
        raise ConfigError(f"cannot read the {title} file {path}: {exc.strerror}") from None


def method_in_force(
    store: Store, overrides: Mapping[str, str | Path | None] | None = None
) -> MethodInForce:
    """The method the evidence base records, with one-run ``overrides`` (part -> file)."""
    for name in overrides or {}:
        part(name)  # an unknown part name is a clear error
    with store.read() as conn:
        stored = latest_versions(conn)
    parts: dict[str, PartInForce] = {}
    for name in METHOD_PARTS:
        base = _from_stored(stored[name]) if name in stored else _packaged(name)
        file = (overrides or {}).get(name)
        parts[name] = _from_file(name, file, base) if file is not None else base
    return MethodInForce(parts)


def stored_rubric(store: Store):
    """The rubric in force in ``store`` (for services called without a workspace)."""
    return method_in_force(store).rubric


def stored_settings(store: Store):
    """The replication/pooling settings in force in ``store``."""
    return method_in_force(store).settings


@contextlib.contextmanager
def open_workspace(
    db: str | None = None,
    user: str | None = None,
    *,
    overrides: Mapping[str, str | Path | None] | None = None,
) -> Iterator[Workspace]:
    """Open the evidence base once: store, method in force (checked) and user."""
    from exposhift.services.setup import open_current

    store = open_current(db, user)
    try:
        method = method_in_force(store, overrides)
        yield Workspace(store=store, method=method, user=store.user)
    finally:
        store.dispose()


def record_missing_parts(store: Store) -> list[StoredVersion]:
    """Store the packaged default of every registered part the evidence base lacks."""
    added = []
    with store.write() as conn:
        held = latest_versions(conn)
        for name, mp in METHOD_PARTS.items():
            if name in held:
                continue
            data = mp.packaged_bytes()
            value = mp.parse(data, str(mp.packaged()))
            added.append(
                add_method_version(
                    conn, store.user, name, data, mp.declared_version(value), "packaged default"
                )
            )
    return added


@dataclass(frozen=True)
class SetResult:
    version: StoredVersion
    previous: StoredVersion | None
    unchanged: bool


def set_method_part(store: Store, name: str, file: str | Path) -> SetResult:
    """Check ``file`` and store it as the next version of part ``name`` (audited).

    Any problem raises before anything is written. A file identical to the version in force
    (same hash) is not stored again.
    """
    mp = part(name)
    path = Path(file)
    data = _read(path, mp.title)
    value = mp.parse(data, str(path))
    with store.write() as conn:
        previous = latest_versions(conn).get(name)
        if previous is not None and previous.content_hash == content_hash(data):
            return SetResult(previous, previous, True)
        version = add_method_version(
            conn, store.user, name, data, mp.declared_version(value), f"file {path.name}"
        )
    return SetResult(version, previous, False)


def method_history(store: Store) -> list[StoredVersion]:
    """Every stored version of every part."""
    with store.read() as conn:
        return method_versions(conn)
