"""Copying zip entries: as stored when unchanged, deflated when new.

Unchanged parts are copied as their stored (compressed) bytes, so they come out
byte-identical without an inflate/deflate round trip; rewritten parts keep the name,
date and attributes of the entry they replace.
"""

from __future__ import annotations

import os
import queue
import struct
import threading
import zipfile
from typing import IO

from sheetvol.workbook.errors import WorkbookError


def unlink_quietly(path: str) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass


def clone_info(info: zipfile.ZipInfo) -> zipfile.ZipInfo:
    """Same name, date, type and attributes; sizes are recomputed on write."""
    zi = zipfile.ZipInfo(info.filename, date_time=info.date_time)
    zi.compress_type = info.compress_type
    zi.external_attr = info.external_attr
    zi.internal_attr = info.internal_attr
    zi.create_system = info.create_system
    zi.comment = info.comment
    zi.flag_bits = info.flag_bits & 0x800  # keep only the UTF-8 name flag
    return zi


def raw_copy(zout: zipfile.ZipFile, zin: zipfile.ZipFile, info: zipfile.ZipInfo) -> bool:
    """Copy an unchanged entry's compressed bytes as they are (no inflate, no deflate).

    This is what ``writestr`` does after compressing, done with the stored bytes; it
    uses zipfile's writer state (``fp``, ``start_dir``, ``filelist``), stable since
    Python 3.6. Returns False (the caller then re-deflates) for anything unusual.
    """
    if info.flag_bits & 0x1 or getattr(zout, "_writing", False):
        return False  # zip-level encryption, or a write handle open
    fp = zin.fp
    if fp is None:
        return False
    fp.seek(info.header_offset)
    head = fp.read(30)
    if len(head) != 30 or head[:4] != b"PK\x03\x04":
        return False
    name_len, extra_len = struct.unpack("<HH", head[26:30])
    zi = clone_info(info)
    zi.file_size, zi.compress_size, zi.CRC = info.file_size, info.compress_size, info.CRC
    zip64 = max(zi.file_size, zi.compress_size) > zipfile.ZIP64_LIMIT
    out = zout.fp
    if out is None:
        return False  # the output archive is closed
    out.seek(zout.start_dir)
    zi.header_offset = out.tell()
    # zipfile's private writer state (see above); typeshed does not declare it
    zout._writecheck(zi)  # type: ignore[attr-defined]
    zout._didModify = True  # type: ignore[attr-defined]
    out.write(zi.FileHeader(zip64))
    fp.seek(info.header_offset + 30 + name_len + extra_len)
    left = info.compress_size
    while left:
        buf = fp.read(min(left, 1 << 22))
        if not buf:
            raise WorkbookError(f"part {info.filename} is cut short; the file is damaged.")
        out.write(buf)
        left -= len(buf)
    zout.start_dir = out.tell()
    zout.filelist.append(zi)
    zout.NameToInfo[zi.filename] = zi
    return True


def set_level(zi: zipfile.ZipInfo, level: int) -> None:
    # the slot is ``_compresslevel`` before Python 3.13 and ``compress_level`` after
    for attr in ("compress_level", "_compresslevel"):
        if attr in zipfile.ZipInfo.__slots__:
            setattr(zi, attr, level)
            return


def write_entry(zout: zipfile.ZipFile, zi: zipfile.ZipInfo, data: bytes, level: int) -> None:
    if zi.compress_type == zipfile.ZIP_DEFLATED:
        set_level(zi, level)
    zout.writestr(zi, data)


class WriteBehind:
    """Writes pieces to ``out`` in a second thread, so deflating overlaps making them.

    zlib (compress and crc32) and file writes release the GIL, so on two cores the
    row loop makes the next piece while this thread deflates the last one. At most
    ``depth`` pieces wait, which bounds the memory held. Use as a context manager: on
    leaving, every queued piece has been written (or the first error is raised).

    Examples
    --------
    >>> import io
    >>> buf = io.BytesIO()
    >>> with WriteBehind(buf) as w:
    ...     w.write(b"<row/>")
    ...     w.write(b"<row/>")
    >>> buf.getvalue()
    b'<row/><row/>'
    """

    def __init__(self, out: IO[bytes], depth: int = 2) -> None:
        self.out = out
        self.error: BaseException | None = None
        self._queue: queue.Queue[bytes | None] = queue.Queue(maxsize=depth)
        self._thread = threading.Thread(target=self._run, name="sheetvol-deflate", daemon=True)
        self._thread.start()

    def _run(self) -> None:
        while (piece := self._queue.get()) is not None:
            if self.error is None:  # after a failure, pieces are only drained
                try:
                    self.out.write(piece)
                except BaseException as exc:  # raised again in the caller's thread
                    self.error = exc

    def write(self, piece: bytes) -> None:
        """Queue ``piece`` (waits while ``depth`` pieces are queued)."""
        if self.error is not None:
            raise self.error
        self._queue.put(piece)

    def close(self) -> None:
        """Wait until every queued piece is written; raise the thread's error if any."""
        if self._thread.is_alive():
            self._queue.put(None)
            self._thread.join()
        if self.error is not None:
            raise self.error

    def __enter__(self) -> WriteBehind:
        return self

    def __exit__(self, kind: object, exc: object, tb: object) -> None:
        if exc is None:
            self.close()
            return
        try:  # the caller failed: stop the thread, and let the caller's error through
            self.close()
        except BaseException:  # the first error is the one that matters
            pass
