"""The registry of method parts: what the evidence base records as "the method in force".

A part is a committee-owned TOML file whose text changes results. Each part declares:

- ``name``: the word users type (``exposhift method set NAME FILE``) and the archive uses;
- ``filename``: the file's usual name (``rubric.toml``), also the name looked for next to a
  database when migration ``0006_method`` records what an existing base used;
- ``packaged``: the packaged default (what ``exposhift init`` stores in a new base);
- ``parse(data, label)``: checks the text and returns the checked object (a
  :class:`~exposhift.appraisal.rubric_types.Rubric`, a
  :class:`~exposhift.replication.settings.ReplicationSettings`, ...); raises an
  :class:`~exposhift.errors.ExposhiftError` naming ``label`` and the line;
- ``declared_version(obj)``: the version the file itself declares (the rubric's
  ``[rubric] version``), "" when it declares none;
- ``option``: the one-run override option of the commands (``--rubric``).

Adding a part is a few lines: build a :class:`MethodPart` and add it to :data:`METHOD_PARTS`
(see docs/method.md). A parser that only reads paths can be adapted with
:func:`path_loader_parser`.

Content hash: ``sha256`` of the bytes after a UTF-8 byte-order mark is dropped and line endings
are made LF (:func:`exposhift.appraisal.rubric.normalise_bytes`): the rubric's hash, recorded
with every appraisal, is the hash of the stored text.
"""

from __future__ import annotations

import hashlib
import tempfile
from collections.abc import Callable
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Any

from exposhift.appraisal.rubric import normalise_bytes, rubric_from_bytes
from exposhift.certainty.settings import certainty_settings_from_text
from exposhift.errors import ConfigError, ExposhiftError
from exposhift.replication.settings_file import settings_from_bytes

__all__ = [
    "METHOD_PARTS",
    "MethodPart",
    "content_hash",
    "packaged_data",
    "part",
    "path_loader_parser",
]


def packaged_data(filename: str) -> Path:
    """A file packaged in ``exposhift/data``."""
    return Path(str(resources.files("exposhift") / "data" / filename))


def content_hash(data: bytes) -> str:
    """sha256 hex digest of the text after :func:`normalise_bytes` (the rubric's hash rule)."""
    return hashlib.sha256(normalise_bytes(data)).hexdigest()


@dataclass(frozen=True)
class MethodPart:
    name: str
    title: str
    filename: str
    packaged: Callable[[], Path]
    parse: Callable[[bytes, str], Any]
    option: str
    declared_version: Callable[[Any], str] = lambda _obj: ""

    def packaged_bytes(self) -> bytes:
        return normalise_bytes(self.packaged().read_bytes())


def path_loader_parser(load: Callable[[Path], Any]) -> Callable[[bytes, str], Any]:
    """Adapt a loader that reads a path (``load(path)``) into a ``parse(data, label)``.

    The text is written to a temporary file of the same name; in an error message the temporary
    path is replaced by ``label``, so the error still names the source and line.
    """

    def parse(data: bytes, label: str) -> Any:
        with tempfile.TemporaryDirectory(prefix="exposhift-method-") as tmp:
            path = Path(tmp) / (Path(label).name if label.endswith(".toml") else "part.toml")
            path.write_bytes(data)
            try:
                return load(path)
            except ExposhiftError as exc:
                raise type(exc)(str(exc).replace(str(path), label)) from None

    return parse


METHOD_PARTS: dict[str, MethodPart] = {
    "rubric": MethodPart(
        name="rubric",
        title="appraisal rubric",
        filename="rubric.toml",
        packaged=lambda: packaged_data("rubric.toml"),
        parse=lambda data, label: rubric_from_bytes(data, label),
        option="--rubric",
        declared_version=lambda rubric: f"{rubric.rubric_id} {rubric.version}",
    ),
    "settings": MethodPart(
        name="settings",
        title="replication and pooling settings",
        filename="replication.toml",
        packaged=lambda: packaged_data("replication.toml"),
        parse=settings_from_bytes,
        option="--settings",
    ),
    "certainty": MethodPart(
        name="certainty",
        title="certainty-of-evidence settings",
        filename="certainty.toml",
        packaged=lambda: packaged_data("certainty.toml"),
        parse=lambda data, label: certainty_settings_from_text(
            normalise_bytes(data).decode("utf-8"), label
        ),
        option="--certainty",
    ),
}


def part(name: str) -> MethodPart:
    """The registered part ``name``; a clear error listing the parts otherwise."""
    try:
        return METHOD_PARTS[name]
    except KeyError:
        raise ConfigError(
            f"unknown method part '{name}'; the parts are: {', '.join(METHOD_PARTS)}"
        ) from None
