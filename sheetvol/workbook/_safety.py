"""Opening an untrusted zip package: signature checks, size limits, entity-free XML.

A workbook is a zip of XML parts. Before anything is inflated the central directory
is checked against two limits (total inflated size, per-part compression ratio) and
every entry against the rules of a spreadsheet package (a relative name without
``..`` or backslashes, each name once, stored or deflated, not encrypted). Parts are
inflated by :class:`PartReader`, which counts the bytes as they come and stops at the
size the entry declares, so a zip whose headers lie never fills memory. XML is
parsed with defusedxml, with any DOCTYPE refused, so no entity is ever expanded or
fetched; :func:`check_package` looks at the prolog of every XML part, also those
only copied. Macros (``vbaProject.bin``) are never opened, only copied.
"""

from __future__ import annotations

import struct
import threading
import zipfile
import zlib
from dataclasses import dataclass
from pathlib import Path
from typing import IO
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
# Spreadsheet programs store parts deflated (8) or stored (0); the zip format's other
# methods (APPNOTE.TXT 4.4.5) are named in the refusal.
METHODS = {zipfile.ZIP_STORED: "stored", zipfile.ZIP_DEFLATED: "deflated"}
OTHER_METHODS = {9: "deflate64", 12: "bzip2", 14: "lzma", 93: "zstandard", 99: "AES"}
# Inflate in steps of this size: memory stays bounded whatever a part claims.
STEP = 1 << 20
# A DOCTYPE must come before the root element; a prolog longer than this (comments and
# processing instructions only) is refused rather than read on.
PROLOG_MAX = 1 << 16


@dataclass(frozen=True)
class Limits:
    """Limits applied when a package is opened."""

    max_total: int = DEFAULT_MAX_TOTAL
    max_ratio: float = DEFAULT_MAX_RATIO


def open_file(path: Path) -> IO[bytes]:
    """Open ``path`` for reading after the signature check; the caller closes it.

    The fill reads the input through this one handle from start to end, so a file
    replaced at the path meanwhile (a sync client, an editor's save) is not mixed in.
    """
    name = path.name
    try:
        fh = open(path, "rb")
    except FileNotFoundError:
        raise WorkbookError(f"{path}: file not found.") from None
    except IsADirectoryError:
        raise WorkbookError(f"{path}: is a folder, not a workbook file.") from None
    except OSError as exc:
        raise WorkbookError(f"{path}: cannot be read ({exc.strerror}).") from None
    try:
        head = fh.read(8)
    except OSError as exc:
        fh.close()
        raise WorkbookError(f"{path}: cannot be read ({exc.strerror}).") from None
    if head == OLE_SIGNATURE:
        fh.close()
        raise WorkbookError(
            f"{name} is password-protected (or an old binary .xls file); save an unprotected "
            ".xlsx copy and run again."
        )
    return fh


def open_zip(source: Path | IO[bytes], limits: Limits, name: str | None = None
             ) -> zipfile.ZipFile:
    """Open a path or an open file as a zip after the size checks; caller closes it."""
    if isinstance(source, Path):
        fh = open_file(source)
        fh.close()
        name = source.name
    name = name or "the workbook"
    try:
        zf = zipfile.ZipFile(source)
    except (zipfile.BadZipFile, zipfile.LargeZipFile, EOFError, ValueError, OSError):
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


def check_entries(zf: zipfile.ZipFile, name: str) -> None:
    """Refuse entries no spreadsheet program writes and every extractor must distrust.

    A name that climbs out of the package (``..``), is absolute, or uses backslashes;
    the same name twice (readers disagree on which copy counts); a compression method
    other than stored or deflated; the encryption flag.
    """
    seen: set[str] = set()
    for info in zf.infolist():
        part = info.filename
        segments = part.split("/")
        if (part.startswith("/") or "\\" in part or ".." in segments or "\0" in part
                or ":" in segments[0]):
            raise WorkbookError(
                f'{name}: the package holds an entry named "{part}", which points outside '
                "the package; no spreadsheet program writes that, so the file is refused.")
        if part in seen:
            raise WorkbookError(
                f"{name}: the package holds the entry {part} twice; programs disagree on "
                "which copy counts, so the file is refused. Open it in your spreadsheet "
                "program and save it again.")
        seen.add(part)
        if info.flag_bits & 0x1:
            raise WorkbookError(
                f"{name}: part {part} is encrypted inside the zip; sheetvol cannot read or "
                "copy it. Save an unprotected .xlsx copy and run again.")
        if info.compress_type not in METHODS:
            method = OTHER_METHODS.get(info.compress_type, f"method {info.compress_type}")
            raise WorkbookError(
                f"{name}: part {part} is compressed with {method}, which spreadsheet "
                "programs do not use and sheetvol cannot read; open the file in your "
                "spreadsheet program and save it again.")


def check_package(zf: zipfile.ZipFile, name: str, limits: Limits) -> None:
    """The entry rules, then no DOCTYPE in any XML part (also the parts only copied)."""
    check_entries(zf, name)
    for info in zf.infolist():
        if info.is_dir() or not info.file_size:
            continue
        with PartReader(zf, info, name, limits) as fh:
            head = fh.read(512)
            utf16 = _utf16(head)
            if not utf16 and not _looks_xml(head):
                continue
            while True:
                state = prolog_state(_as_utf8(head, utf16))
                if state is not None:
                    if state:
                        raise WorkbookError(refused_dtd(info.filename, name))
                    break
                more = fh.read(STEP)
                if not more:
                    break
                head += more
                if len(head) > PROLOG_MAX:
                    raise WorkbookError(
                        f"{name}: part {info.filename} starts with more than "
                        f"{PROLOG_MAX // 1024} KiB before its first element; refusing it "
                        "as unsafe XML.")


def _looks_xml(head: bytes) -> bool:
    text = head.lstrip(b"\xef\xbb\xbf \t\r\n")
    return text.startswith(b"<")


def _utf16(head: bytes) -> str:
    """The UTF-16 codec of a part written in UTF-16 (XML allows it), else ""."""
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        return "utf-16"
    if head.startswith(b"<\0"):  # no mark: told by the first "<" (XML 1.0, appendix F)
        return "utf-16-le"
    if head.startswith(b"\0<"):
        return "utf-16-be"
    return ""


def _as_utf8(head: bytes, codec: str) -> bytes:
    if not codec:
        return head
    return head[: len(head) // 2 * 2].decode(codec, errors="replace").encode("utf-8")


class PartReader:
    """One zip entry inflated step by step, counted against what its entry declares.

    ``zipfile`` inflates a whole read at once (up to 2 GiB for ``read()``) before it
    cuts the data to the declared size, so a 512-byte entry that inflates to 3 GB
    fills memory first. This reader inflates at most :data:`STEP` bytes per step and
    refuses as soon as the output passes the declared size (or the package limit),
    naming the cause; at the end the CRC is checked as zipfile does.
    """

    def __init__(self, zf: zipfile.ZipFile, info: zipfile.ZipInfo, name: str,
                 limits: Limits) -> None:
        self.info, self.name = info, name
        self.fp = zf.fp
        # zipfile's own readers share the file under this lock; take it for each seek+read
        self.lock = getattr(zf, "_lock", None) or threading.RLock()
        self.limit = min(info.file_size, limits.max_total)
        if self.fp is None:
            raise WorkbookError(f"{name}: the package is closed.")
        with self.lock:
            self.fp.seek(info.header_offset)
            head = self.fp.read(30)
        if len(head) != 30 or head[:4] != b"PK\x03\x04":
            raise self._damaged("its local header is missing")
        name_len, extra_len = struct.unpack("<HH", head[26:30])
        self.pos = info.header_offset + 30 + name_len + extra_len
        self.left = info.compress_size
        self.dec = zlib.decompressobj(-15) if info.compress_type == zipfile.ZIP_DEFLATED else None
        self.pending = b""
        self.out = 0
        self.crc = 0
        self.eof = False

    def _damaged(self, why: str) -> WorkbookError:
        return WorkbookError(f"{self.name}: part {self.info.filename} is damaged ({why}); open "
                             "the file in your spreadsheet program and save it again.")

    def _raw(self, n: int) -> bytes:
        if self.pending:
            data, self.pending = self.pending[:n], self.pending[n:]
            return data
        if not self.left:
            return b""
        assert self.fp is not None
        with self.lock:
            self.fp.seek(self.pos)
            data = self.fp.read(min(n, self.left))
        if not data:
            raise self._damaged("it is cut short")
        self.pos += len(data)
        self.left -= len(data)
        return data

    def _step(self, n: int) -> bytes:
        """Up to ``n`` more inflated bytes (b"" only at the end of the entry)."""
        while True:
            if self.dec is None:
                data = self._raw(n)
                if not data:
                    self.eof = True
            else:
                raw = self._raw(STEP)
                try:
                    data = self.dec.decompress(raw, n)
                except zlib.error as exc:
                    raise self._damaged(str(exc)) from None
                self.pending = self.dec.unconsumed_tail + self.pending
                if self.dec.eof or (not raw and not self.pending):
                    self.eof = True
            self.out += len(data)
            if self.out > self.limit:
                raise self._bomb()
            self.crc = zlib.crc32(data, self.crc)
            if data or self.eof:
                if self.eof:
                    self._finish()
                return data

    def _bomb(self) -> WorkbookError:
        if self.out > self.info.file_size:
            return WorkbookError(
                f"{self.name}: part {self.info.filename} inflates to more than the "
                f"{self.info.file_size:,} bytes its zip entry declares; refusing it as a "
                "possible zip bomb.")
        return WorkbookError(
            f"{self.name}: part {self.info.filename} inflates to more than "
            f"{self.limit / 1024**3:.1f} GiB; refusing it as a possible zip bomb.")

    def _finish(self) -> None:
        if self.out != self.info.file_size:
            raise self._damaged(f"it inflates to {self.out:,} bytes, not the "
                                f"{self.info.file_size:,} its entry declares")
        if self.crc != self.info.CRC:
            raise self._damaged("its checksum does not match")

    def read(self, n: int = -1) -> bytes:
        """Up to ``n`` inflated bytes (all the rest when ``n`` is negative)."""
        if n is None or n < 0:
            parts = []
            while not self.eof:
                parts.append(self._step(STEP))
            return b"".join(parts)
        out = []
        while n > 0 and not self.eof:
            data = self._step(min(n, STEP))
            out.append(data)
            n -= len(data)
        return b"".join(out)

    def close(self) -> None:
        self.fp = None

    def __enter__(self) -> PartReader:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def open_part(zf: zipfile.ZipFile, part: str, name: str, limits: Limits | None = None
              ) -> PartReader:
    """A reader of one part that never inflates beyond what its entry declares."""
    try:
        info = zf.getinfo(part)
    except KeyError:
        raise WorkbookError(f"{name}: part {part} is missing; the workbook is damaged.") from None
    return PartReader(zf, info, name, limits or Limits())


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


def read_part(zf: zipfile.ZipFile, part: str, name: str, limits: Limits | None = None
              ) -> bytes:
    """Inflate one part, never beyond the size its entry declares (see :class:`PartReader`)."""
    try:
        with open_part(zf, part, name, limits) as fh:
            return fh.read()
    except (zipfile.BadZipFile, OSError, EOFError) as exc:
        raise WorkbookError(f"{name}: part {part} is damaged ({exc}).") from None


def read_xml_part(zf: zipfile.ZipFile, part: str, name: str, limits: Limits | None = None
                  ) -> bytes:
    """Inflate an XML part that will be edited as text; refuse it unless it is UTF-8."""
    data = read_part(zf, part, name, limits)
    try:
        data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise WorkbookError(f"{name}: part {part} is not UTF-8 text ({exc.reason} at byte "
                            f"{exc.start}); the file is damaged. Open it in your spreadsheet "
                            "program and save it again.") from None
    return data


def parse_xml(data: bytes, part: str, name: str) -> Element:
    """Parse a (small) XML part with entities and DOCTYPEs refused."""
    try:
        return DET.fromstring(data, forbid_dtd=True, forbid_entities=True,
                              forbid_external=True)
    except DefusedXmlException:
        raise WorkbookError(refused_dtd(part, name)) from None
    except DET.ParseError as exc:
        raise WorkbookError(f"{name}: part {part} is not well-formed XML ({exc}).") from None
    except (LookupError, ValueError) as exc:  # e.g. an encoding no codec knows
        raise WorkbookError(f"{name}: part {part} cannot be read as XML ({exc}).") from None


def refused_dtd(part: str, name: str) -> str:
    """The message for a part carrying a DOCTYPE or entity declaration."""
    return (f"{name}: part {part} declares a DOCTYPE/ENTITY, which no spreadsheet program "
            "writes; refusing it as unsafe XML.")


def check_prolog(head: bytes, part: str, name: str) -> None:
    """Refuse a DOCTYPE before the root element (for parts scanned as bytes, not parsed)."""
    if prolog_state(head):
        raise WorkbookError(refused_dtd(part, name))


def prolog_state(head: bytes) -> bool | None:
    """True: a DOCTYPE (or other declaration) before the root; False: the root element
    comes first; None: ``head`` ends inside the prolog (read more).

    >>> prolog_state(b'<?xml version="1.0"?><!-- c --><root/>')
    False
    >>> prolog_state(b'<?xml version="1.0"?><!DOCTYPE r [<!ENTITY e "x">]><r/>')
    True
    >>> prolog_state(b'<?xml version="1.0"?><!-- not closed') is None
    True
    """
    i = 0
    while True:
        j = head.find(b"<", i)
        if j < 0 or j + 1 >= len(head):
            return None
        nxt = head[j + 1 : j + 2]
        if nxt == b"?":  # XML declaration / processing instruction
            i = head.find(b"?>", j) + 2
            if i < 2:
                return None
            continue
        if head.startswith(b"<!--", j):
            i = head.find(b"-->", j) + 3
            if i < 3:
                return None
            continue
        if nxt == b"!":
            return len(head) >= j + 4 or None
        return False


def local(tag: str) -> str:
    """Local name of a Clark-notation tag ``{ns}name``."""
    return tag.rpartition("}")[2]
