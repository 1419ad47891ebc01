"""Writing a dossier's files into its folder (nothing partial, nothing of others deleted) and
reading a bundle back (folder or zip) for ``dossier diff``.

Layout of the output folder::

    DIR/dossier.html  DIR/dossier.docx  DIR/dossier.pdf (when asked and LibreOffice exists)
    DIR/bundle/manifest.json  DIR/bundle/records.json  DIR/bundle/<table>.csv|.json
    DIR/bundle.zip (with --zip)
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import tempfile
import zipfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from exposhift.dossier.manifest import FORMAT, MANIFEST, RECORDS, TABLES
from exposhift.errors import ConfigError, ExposhiftError

BUNDLE_DIR = "bundle"
#: every name a dossier may write into its folder (the only files it ever replaces)
OWN_NAMES = frozenset({"dossier.html", "dossier.docx", "dossier.pdf", "bundle.zip", BUNDLE_DIR})
OWN_BUNDLE_NAMES = frozenset(
    {MANIFEST, RECORDS, *(f"{t}.{e}" for t in TABLES for e in ("csv", "json"))}
)
ZIP_DATE = (1980, 1, 1, 0, 0, 0)


class BundleError(ExposhiftError):
    """A bundle given to ``dossier diff`` or ``--since`` that cannot be read."""

    exit_code = 2


def sha256_text(text: str | bytes) -> str:
    data = text.encode("utf-8") if isinstance(text, str) else text
    return hashlib.sha256(data).hexdigest()


def check_out_dir(out: Path, force: bool) -> None:
    """Refuse a folder that holds files a dossier does not write, unless ``force``."""
    if out.exists() and not out.is_dir():
        raise ConfigError(f"{out} exists and is not a folder; name another --out")
    if not out.exists() or force:
        return
    foreign = sorted(p.name for p in out.iterdir() if p.name not in OWN_NAMES)
    bundle = out / BUNDLE_DIR
    if bundle.is_dir():
        foreign += sorted(
            f"{BUNDLE_DIR}/{p.name}" for p in bundle.iterdir() if p.name not in OWN_BUNDLE_NAMES
        )
    if foreign:
        shown = ", ".join(foreign[:5]) + (" ..." if len(foreign) > 5 else "")
        raise ConfigError(
            f"{out} already holds files a dossier did not write ({shown}); name "
            "an empty or new --out folder, or add --force (files the dossier "
            "does not write are never deleted)"
        )


@dataclass(frozen=True)
class Written:
    files: list[str]


def write_outputs(out: Path, files: dict[str, bytes | str]) -> Written:
    """Write ``files`` (relative name -> content) into ``out``: all into a temporary folder
    first, then each moved into place, so a failure leaves no half-written file."""
    out.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=".dossier-", dir=out))
    try:
        for name, content in files.items():
            path = tmp / name
            path.parent.mkdir(parents=True, exist_ok=True)
            data = content.encode("utf-8") if isinstance(content, str) else content
            path.write_bytes(data)
        written = []
        for name in files:
            target = out / name
            target.parent.mkdir(parents=True, exist_ok=True)
            os.replace(tmp / name, target)
            written.append(str(target))
        return Written(written)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def zip_bytes(files: dict[str, str]) -> bytes:
    """A zip of the bundle files with fixed dates and order (the same files, the same bytes)."""
    import io

    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", compression=zipfile.ZIP_DEFLATED) as z:
        for name in sorted(files):
            info = zipfile.ZipInfo(f"{BUNDLE_DIR}/{name}", date_time=ZIP_DATE)
            info.compress_type = zipfile.ZIP_DEFLATED
            info.external_attr = 0o644 << 16
            z.writestr(info, files[name])
    return buf.getvalue()


# ----------------------------------------------------------------------------- reading
@dataclass(frozen=True)
class Bundle:
    """A bundle read back: its manifest, its records and its tables."""

    source: str
    manifest: dict[str, Any]
    records: dict[str, list[dict]]
    tables: dict[str, list[dict]]


def _reader(path: Path):
    """name -> text reader for a bundle folder, a dossier folder or a bundle zip."""
    if path.is_file() and zipfile.is_zipfile(path):
        z = zipfile.ZipFile(path)
        names = set(z.namelist())

        def read(name: str) -> str | None:
            for cand in (f"{BUNDLE_DIR}/{name}", name):
                if cand in names:
                    return z.read(cand).decode("utf-8")
            return None

        return read
    if path.is_dir():
        base = path / BUNDLE_DIR if (path / BUNDLE_DIR / MANIFEST).is_file() else path

        def read(name: str) -> str | None:
            p = base / name
            return p.read_text(encoding="utf-8") if p.is_file() else None

        return read
    raise BundleError(
        f"{path}: no such bundle; give the bundle folder (or bundle.zip) an "
        "earlier 'exposhift dossier' wrote"
    )


def read_bundle(path: str | Path) -> Bundle:
    """Read a bundle; a missing or malformed manifest is one clear error."""
    path = Path(path)
    read = _reader(path)
    text = read(MANIFEST)
    if text is None:
        raise BundleError(
            f"{path}: no {MANIFEST}; give the bundle folder (or bundle.zip) an "
            "earlier 'exposhift dossier' wrote"
        )
    try:
        manifest = json.loads(text)
    except json.JSONDecodeError as exc:
        raise BundleError(
            f"{path}: {MANIFEST} is not valid JSON (line {exc.lineno}, column "
            f"{exc.colno}: {exc.msg}); the bundle is damaged, rebuild it"
        ) from exc
    missing = [
        k
        for k in ("format", "fingerprint", "records", "made_at", "exposhift_version", "exposure")
        if not isinstance(manifest, dict) or k not in manifest
    ]
    if missing or manifest.get("format") != FORMAT:
        what = (
            f"lacks {', '.join(missing)}"
            if missing
            else f"has format {manifest.get('format')!r}, not {FORMAT!r}"
        )
        raise BundleError(f"{path}: {MANIFEST} {what}; it is not a dossier bundle manifest")
    records_text = read(RECORDS)
    try:
        records = json.loads(records_text) if records_text is not None else {}
        tables = {t: json.loads(read(f"{t}.json") or "[]") for t in TABLES}
    except json.JSONDecodeError as exc:
        raise BundleError(
            f"{path}: a bundle table is not valid JSON ({exc.msg}); the bundle "
            "is damaged, rebuild it"
        ) from exc
    return Bundle(str(path), manifest, records, tables)
