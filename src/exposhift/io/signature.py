"""What a file really is, from its first bytes (its signature), whatever its name says.

A workbook saved with a ``.csv`` name, an old ``.xls``, an OpenDocument sheet or a PDF would
otherwise fail as "not valid UTF-8 text". Signatures (magic numbers): ZIP ``PK\\x03\\x04``
(XLSX and ODS are ZIP containers: ``xl/`` members, or a ``mimetype`` member naming
``application/vnd.oasis.opendocument.spreadsheet``; ECMA-376 Part 2 and OASIS ODF 1.2 Part 3
§3.3); OLE2 compound file ``D0 CF 11 E0 A1 B1 1A E1`` (old Excel ``.xls``; [MS-CFB] §2.2);
``%PDF-`` (ISO 32000-1 §7.5.2); byte-order marks ``FF FE`` / ``FE FF`` (UTF-16 LE/BE) and
``EF BB BF`` (UTF-8; the Unicode Standard §23.8).
"""

from __future__ import annotations

import zipfile
from pathlib import Path

ZIP = b"PK\x03\x04"
OLE2 = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
PDF = b"%PDF-"
UTF16_BOMS = (b"\xff\xfe", b"\xfe\xff")
ODS_MIME = b"application/vnd.oasis.opendocument.spreadsheet"

#: kind -> (what the file is, what to do)
KINDS = {
    "xlsx": (
        "an Excel workbook (.xlsx)",
        "rename it to .xlsx and import it again, or save it from Excel as 'CSV UTF-8'",
    ),
    "ods": (
        "an OpenDocument spreadsheet (.ods)",
        "save it as .xlsx or as CSV (UTF-8) and import that",
    ),
    "xls": (
        "an old-format Excel workbook (.xls)",
        "open it and save it as .xlsx or as CSV (UTF-8), then import that",
    ),
    "pdf": (
        "a PDF document",
        "exposhift reads extraction sheets: copy the table into the "
        "template (docs/example-sheet.csv) and save it as .csv or .xlsx",
    ),
    "zip": ("a ZIP archive", "unpack it and import the sheet inside"),
}


def sniff(path: Path) -> str | None:
    """``xlsx``, ``ods``, ``zip``, ``xls``, ``pdf``, ``utf-16`` or None (plain text/unknown)."""
    with open(path, "rb") as fh:
        head = fh.read(8)
    if head.startswith(ZIP):
        try:
            with zipfile.ZipFile(path) as zf:
                names = zf.namelist()
                if "mimetype" in names and zf.read("mimetype").strip() == ODS_MIME:
                    return "ods"
        except (zipfile.BadZipFile, OSError, KeyError):
            return "zip"
        return "xlsx" if any(n.startswith("xl/") for n in names) else "zip"
    if head.startswith(OLE2):
        return "xls"
    if head.startswith(PDF):
        return "pdf"
    if head[:2] in UTF16_BOMS:
        return "utf-16"
    return None


def wrong_kind_message(path: Path, kind: str, expected: str) -> str:
    """The message for a file whose signature is not the ``expected`` kind (csv or xlsx)."""
    what, todo = KINDS[kind]
    wanted = "a CSV text file" if expected == "csv" else "an .xlsx workbook"
    return (
        f"this file is {what}, not {wanted}, although its name ends in "
        f"{path.suffix or '(nothing)'}; {todo}"
    )
