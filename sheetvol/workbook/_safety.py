"""Opening an untrusted zip package: signature checks, size limits, entity-free XML.

A workbook is a zip of XML parts. Before anything is inflated the central directory
is checked against two limits (total inflated size, per-part compression ratio); XML
is parsed with defusedxml, with any DOCTYPE refused, so no entity is ever expanded
or fetched. Macros (``vbaProject.bin``) are never opened, only copied.
"""

from __future__ import annotations

import zipfile
import zlib
from dataclasses import dataclass
from pathlib import Path
from xml.etree.ElementTree import Element

import defusedxml.ElementTree as DET
from defusedxml import DefusedXmlException

from sheetvol.workbook.errors import WorkbookError

OLE_SIGNATURE = bytes.fromhex("D0CF11E0A1B11AE1")

# A 1,048,576-row by 20-column sheet inflates to roughly 1 GB of XML; 2 GiB leaves room.
DEFAULT_MAX_TOTAL = 2 * 1024**3
# Plain numeric sheet XML deflates about 5-20 to 1; 200 to 1 only happens with
# deliberately repetitive payloads (common practice for zip-bomb checks, no source).
DEFAULT_MAX_RATIO = 200.0
# Parts smaller than this are not ratio-checked: a few kB of zeros can compress 1000:1
# and do no harm.
RATIO_FLOOR = 1024 * 1024


@dataclass(frozen=True)
class Limits:
    """Limits applied when a package is opened."""

    max_total: int = DEFAULT_MAX_TOTAL
    max_ratio: float = DEFAULT_MAX_RATIO


def open_zip(path: Path, limits: Limits) -> zipfile.ZipFile:
    """Open ``path`` as a zip after the signature and size checks; caller closes it."""
    name = path.name
    try:
        with open(path, "rb") as fh:
            head = fh.read(8)
    except FileNotFoundError:
        raise WorkbookError(f"{path}: file not found.") from None
    except IsADirectoryError:
        raise WorkbookError(f"{path}: is a folder, not a workbook file.") from None
    except OSError as exc:
        raise WorkbookError(f"{path}: cannot be read ({exc.strerror}).") from None
    if head == OLE_SIGNATURE:
        raise WorkbookError(
            f"{name} is password-protected (or an old binary .xls file); save an unprotected "
            ".xlsx copy and run again."
        )
    try:
        zf = zipfile.ZipFile(path)
    except (zipfile.BadZipFile, zipfile.LargeZipFile, EOFError, ValueError):
        raise WorkbookError(
            f"{name} is not an .xlsx workbook (not a zip package) or is damaged; open it in "
            "your spreadsheet program and save it as .xlsx."
        ) from None
    try:
        check_sizes(zf, name, limits)
    except WorkbookError:
        zf.close()
        raise
    return zf


def check_sizes(zf: zipfile.ZipFile, name: str, limits: Limits) -> None:
    """Refuse packages whose declared sizes look like a zip bomb."""
    total = 0
    for info in zf.infolist():
        total += info.file_size
        if info.file_size > RATIO_FLOOR:
            ratio = info.file_size / max(info.compress_size, 1)
            if ratio > limits.max_ratio:
                raise WorkbookError(
                    f"{name}: part {info.filename} expands {ratio:.0f} times its stored size "
                    f"(limit {limits.max_ratio:.0f}); refusing it as a possible zip bomb."
                )
        if total > limits.max_total:
            raise WorkbookError(
                f"{name}: the parts expand to more than {limits.max_total / 1024**3:.1f} GiB; "
                "refusing it as a possible zip bomb (raise the limit if the file is trusted)."
            )


def read_part(zf: zipfile.ZipFile, part: str, name: str) -> bytes:
    """Inflate one part; the size was checked at open and zipfile stops at that size."""
    try:
        return zf.read(part)
    except KeyError:
        raise WorkbookError(f"{name}: part {part} is missing; the workbook is damaged.") from None
    except (zipfile.BadZipFile, zlib.error, OSError, EOFError) as exc:
        raise WorkbookError(f"{name}: part {part} is damaged ({exc}).") from None


def parse_xml(data: bytes, part: str, name: str) -> Element:
    """Parse a (small) XML part with entities and DOCTYPEs refused."""
    try:
        return DET.fromstring(data, forbid_dtd=True, forbid_entities=True,
                              forbid_external=True)
    except DefusedXmlException:
        raise WorkbookError(refused_dtd(part, name)) from None
    except DET.ParseError as exc:
        raise WorkbookError(f"{name}: part {part} is not well-formed XML ({exc}).") from None


def refused_dtd(part: str, name: str) -> str:
    """The message for a part carrying a DOCTYPE or entity declaration."""
    return (f"{name}: part {part} declares a DOCTYPE/ENTITY, which no spreadsheet program "
            "writes; refusing it as unsafe XML.")


def check_prolog(head: bytes, part: str, name: str) -> None:
    """Refuse a DOCTYPE before the root element (for parts scanned as bytes, not parsed)."""
    i = 0
    while True:
        j = head.find(b"<", i)
        if j < 0 or j + 1 >= len(head):
            return
        nxt = head[j + 1 : j + 2]
        if nxt == b"?":  # XML declaration / processing instruction
            i = head.find(b"?>", j) + 2
            if i < 2:
                return
            continue
        if head.startswith(b"<!--", j):
            i = head.find(b"-->", j) + 3
            if i < 3:
                return
            continue
        if nxt == b"!":
            raise WorkbookError(refused_dtd(part, name))
        return


def local(tag: str) -> str:
    """Local name of a Clark-notation tag ``{ns}name``."""
    return tag.rpartition("}")[2]
