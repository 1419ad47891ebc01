"""Exports for the browser's download buttons: the archive, the sheet and a dossier, as bytes.

Each is made by the command-line export's own service (``exposhift export`` →
:func:`exposhift.services.exporting.export_store`; ``exposhift dossier`` →
:func:`exposhift.services.dossier.build_dossier`) into a private temporary directory and read
back, so a download holds exactly what the command would have written. The temporary files
are removed when the call returns.
"""

from __future__ import annotations

import tempfile
from dataclasses import dataclass, field
from pathlib import Path

from exposhift.errors import ConfigError
from exposhift.services.dossier import build_dossier, slug
from exposhift.services.exporting import export_store
from exposhift.store.database import Store

MIME = {
    "json": "application/json",
    "csv": "text/csv",
    "xlsx": "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet",
    "html": "text/html",
    "docx": "application/vnd.openxmlformats-officedocument.wordprocessingml.document",
}
SHEET_FORMATS = ("csv", "xlsx")
DOSSIER_FORMATS = ("html", "docx")


@dataclass(frozen=True)
class Download:
    name: str  # the file name offered to the browser
    data: bytes
    mime: str
    counts: dict[str, int] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    fingerprint: str | None = None  # a dossier's fingerprint


def archive_download(store: Store) -> Download:
    """The whole evidence base as the lossless JSON archive (``exposhift export x.json``)."""
    with tempfile.TemporaryDirectory(prefix="exposhift-download-") as tmp:
        path = Path(tmp) / "evidence-archive.json"
        result = export_store(store, path)
        return Download(path.name, path.read_bytes(), MIME["json"], result.counts, result.warnings)


def sheet_download(store: Store, fmt: str = "csv", exposure: str | None = None) -> Download:
    """The extraction sheet (one row per estimate), optionally of one exposure."""
    if fmt not in SHEET_FORMATS:
        raise ConfigError(f"unknown sheet format '{fmt}'; use {' or '.join(SHEET_FORMATS)}")
    name = "estimates" if exposure is None else f"estimates-{slug(exposure)}"
    with tempfile.TemporaryDirectory(prefix="exposhift-download-") as tmp:
        path = Path(tmp) / f"{name}.{fmt}"
        result = export_store(store, path, exposure=exposure)
        return Download(path.name, path.read_bytes(), MIME[fmt], result.counts, result.warnings)


def dossier_download(store: Store, exposure: str, fmt: str = "html") -> Download:
    """The dossier of one exposure as HTML or Word (``exposhift dossier --format FMT``)."""
    if fmt not in DOSSIER_FORMATS:
        raise ConfigError(f"unknown dossier format '{fmt}'; use {' or '.join(DOSSIER_FORMATS)}")
    with tempfile.TemporaryDirectory(prefix="exposhift-download-") as tmp:
        out = Path(tmp) / "dossier"
        result = build_dossier(store, exposure, out=out, formats=[fmt])
        path = out / f"dossier.{fmt}"
        return Download(
            f"dossier-{slug(exposure)}.{fmt}",
            path.read_bytes(),
            MIME[fmt],
            {},
            list(result.warnings),
            result.fingerprint,
        )
