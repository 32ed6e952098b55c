"""Appending number formats and a bold header style to ``xl/styles.xml``.

Only appends: existing ``numFmt`` ids, fonts and ``cellXfs`` indices never move, so
every existing ``s="..."`` keeps meaning what it meant. An ``xf`` that is already
there (from an earlier fill) is reused instead of appended again.

Edits follow the element structure, not byte offsets: the part is cut into the
root's start tag, its top-level children and its end tag (a self-closing root is
opened first), and a missing block is created in its schema place (ECMA-376 Part 1,
18.8.39). A block the new entries depend on is created with the default entry first
(font 0, fill 0 and 1, border 0, the Normal cell style and ``xf`` 0), so creating it
never restyles the cells already there.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from sheetvol.workbook._sheetxml import escape_text, unescape
from sheetvol.workbook.errors import WorkbookError

# Built-in number formats whose ids mean the same in every locale (ECMA-376 Part 1,
# 18.8.30). Locale-dependent ones (dates, currency) get a custom id instead.
BUILTIN_FORMATS = {"General": 0, "0": 1, "0.00": 2, "#,##0": 3, "#,##0.00": 4, "0%": 9,
                   "0.00%": 10, "0.00E+00": 11, "@": 49}
FIRST_CUSTOM_ID = 164

# The children of <styleSheet>, in schema order (ECMA-376 Part 1, 18.8.39).
ORDER = ("numFmts", "fonts", "fills", "borders", "cellStyleXfs", "cellXfs", "cellStyles",
         "dxfs", "tableStyles", "colors", "extLst")
_ITEM = {"numFmts": "numFmt", "fonts": "font", "fills": "fill", "borders": "border",
         "cellStyleXfs": "xf", "cellXfs": "xf", "cellStyles": "cellStyle"}
# What a block holds when it has to be created: the entries every workbook has at index 0
# (and fill 1, which spreadsheet programs reserve), written with the part's prefix.
_DEFAULTS = {
    "fonts": ('<{p}font><{p}sz val="11"/><{p}name val="Calibri"/></{p}font>',),
    "fills": ('<{p}fill><{p}patternFill patternType="none"/></{p}fill>',
              '<{p}fill><{p}patternFill patternType="gray125"/></{p}fill>'),
    "borders": ("<{p}border><{p}left/><{p}right/><{p}top/><{p}bottom/><{p}diagonal/></{p}border>",),
    "cellStyleXfs": ('<{p}xf numFmtId="0" fontId="0" fillId="0" borderId="0"/>',),
    "cellXfs": ('<{p}xf numFmtId="0" fontId="0" fillId="0" borderId="0" xfId="0"/>',),
    "cellStyles": ('<{p}cellStyle name="Normal" xfId="0" builtinId="0"/>',),
}

# Markup tokens: comments, CDATA, processing instructions and declarations are skipped
# whole; a tag's attribute values may hold ">" inside quotes.
_TOKEN = re.compile(
    r"<!--.*?-->|<!\[CDATA\[.*?\]\]>|<\?.*?\?>|<![^>]*>"
    r"|<(/?)([A-Za-z_][\w.\-]*:)?([A-Za-z_][\w.\-]*)((?:[^>\"']|\"[^\"]*\"|'[^']*')*?)(/?)>",
    re.S)


@dataclass
class _Child:
    """A top-level child of the root: its span, and its content's span (None: self-closing)."""

    name: str
    start: int
    end: int
    inner: tuple[int, int] | None


def _structure(text: str) -> tuple[str, tuple[int, int], int, list[_Child]]:
    """The root's prefix, start-tag span and end-tag start, and its top-level children.

    Raises WorkbookError when the text is not one ``styleSheet`` element.
    """
    root: re.Match[str] | None = None
    children: list[_Child] = []
    stack: list[tuple[str, int, int]] = []  # (name, start, content start)
    for m in _TOKEN.finditer(text):
        if m[3] is None:
            continue
        closing, name, empty = m[1], m[3], m[5]
        if root is None:
            if closing or name != "styleSheet":
                break
            root = m
            if empty:
                return m[2] or "", (m.start(), m.end()), -1, []
            continue
        if closing:
            if not stack:  # the root's end tag
                return root[2] or "", (root.start(), root.end()), m.start(), children
            child, start, content = stack.pop()
            if not stack:
                children.append(_Child(child, start, m.end(), (content, m.start())))
        elif empty:
            if not stack:
                children.append(_Child(name, m.start(), m.end(), None))
        else:
            stack.append((name, m.start(), m.end()))
    raise WorkbookError("the styles part is not one well-formed styleSheet element")


_START = re.compile(r"<[A-Za-z_][\w.:\-]*(?:[^>\"']|\"[^\"]*\"|'[^']*')*?/?>")


def _inner(element: str) -> str | None:
    """The content of one element's text (None when it is self-closing)."""
    tag = _START.match(element)
    if tag is None or tag[0].endswith("/>"):
        return None
    return element[tag.end():element.rindex("</")]


class StyleBook:
    """Edits one styles part as text; call :meth:`finish` for the new bytes.

    Examples
    --------
    >>> book = StyleBook(b'<styleSheet xmlns="x"/>\\n')
    >>> book.xf(book.number_format_id("0.000"), book.bold_font_id())
    1
    >>> book.finish().decode().count("<font>")
    2
    """

    def __init__(self, data: bytes) -> None:
        text = data.decode("utf-8")
        prefix, tag, end, children = _structure(text)
        self.prefix = prefix
        if end < 0:  # <styleSheet .../>: open it, so children have somewhere to go
            self.head = text[:tag[0]] + re.sub(r"\s*/>$", ">", text[tag[0]:tag[1]])
            self.tail = f"</{prefix}styleSheet>" + text[tag[1]:]
            self.pieces: list[list] = []
        else:
            # the root's content as pieces: [name, text] for a child element, [None, text]
            # for what lies between (whitespace, comments), each edited on its own
            self.head, self.tail, self.pieces = text[:tag[1]], text[end:], []
            at = tag[1]
            for c in children:
                if c.start > at:
                    self.pieces.append([None, text[at:c.start]])
                self.pieces.append([c.name, text[c.start:c.end]])
                at = c.end
            if end > at:
                self.pieces.append([None, text[at:end]])
        self.changed = False
        self._cache: dict[str, list[str]] = {}

    def _index(self, name: str) -> int | None:
        return next((k for k, (n, _) in enumerate(self.pieces) if n == name), None)

    def _set(self, k: int, name: str, text: str, insert: bool = False) -> None:
        if insert:
            self.pieces.insert(k, [name, text])
        else:
            self.pieces[k] = [name, text]
        self._cache.pop(name, None)
        self.changed = True

    def _items(self, name: str) -> list[str]:
        """The entries of block ``name`` as text (none when the block is absent)."""
        if name not in self._cache:
            k = self._index(name)
            inner = _inner(self.pieces[k][1]) if k is not None else None
            p = re.escape(self.prefix)
            item = _ITEM[name]
            self._cache[name] = [] if inner is None else [x[0] for x in re.finditer(
                rf"<{p}{item}(?=[\s>/])(?:[^>\"']|\"[^\"]*\"|'[^']*')*?(/>|>.*?</{p}{item}>)",
                inner, re.S)]
        return self._cache[name]

    def _create(self, name: str, entries: list[str]) -> None:
        """Insert block ``name`` holding ``entries`` at its schema place."""
        p = self.prefix
        later = set(ORDER[ORDER.index(name) + 1:])
        where = next((k for k, (n, _) in enumerate(self.pieces) if n in later),
                     len(self.pieces))
        block = f'<{p}{name} count="{len(entries)}">{"".join(entries)}</{p}{name}>'
        self._set(where, name, block, insert=True)

    def _ensure(self, name: str) -> None:
        """Block ``name`` with its default entries, when the part has none."""
        if name in _DEFAULTS and not self._items(name):
            k = self._index(name)
            if k is not None:  # present but empty: replaced by one with the defaults
                del self.pieces[k]
                self._cache.pop(name, None)
            self._create(name, [d.format(p=self.prefix) for d in _DEFAULTS[name]])

    def _append(self, name: str, element: str) -> int:
        """Append ``element`` to block ``name`` (creating the block); return its index."""
        p = self.prefix
        k = self._index(name)
        if k is None:
            self._create(name, [element])
            return 0
        items = self._items(name)
        count = len(items)
        text = self.pieces[k][1]
        tag = _START.match(text)
        assert tag is not None  # a piece with a name starts with its start tag
        attrs = re.sub(r"^<[\w.:\-]+|/?>$", "", tag[0])
        attrs = re.sub(r'\s+count\s*=\s*["\']\d*["\']', "", attrs) + f' count="{count + 1}"'
        inner = _inner(text) or ""
        self._set(k, name, f"<{p}{name}{attrs}>{inner}{element}</{p}{name}>")
        self._cache[name] = [*items, element]  # known without reading the block again
        return count

    def number_format_id(self, code: str) -> int:
        """Id of ``code``: built-in, already defined, or newly appended."""
        if code in BUILTIN_FORMATS:
            return BUILTIN_FORMATS[code]
        ids = []
        for el in self._items("numFmts"):
            mid = re.search(r'numFmtId\s*=\s*["\'](\d+)', el)
            mcode = re.search(r'formatCode\s*=\s*(["\'])(.*?)\1', el, re.S)
            if mid:
                ids.append(int(mid[1]))
                if mcode and unescape(mcode[2].encode()) == code:
                    return int(mid[1])
        new_id = max([FIRST_CUSTOM_ID - 1, *ids]) + 1
        self._append("numFmts", f'<{self.prefix}numFmt numFmtId="{new_id}" '
                     f'formatCode="{escape_text(code)}"/>')
        return new_id

    def default_font_id(self) -> int:
        """The font of cells without a style: the one ``xf`` 0 of ``cellXfs`` names."""
        xfs = self._items("cellXfs")
        m = re.search(r'\sfontId\s*=\s*["\'](\d+)', xfs[0]) if xfs else None
        fid = int(m[1]) if m else 0
        return fid if fid < len(self._items("fonts")) else 0

    def bold_font_id(self) -> int:
        """The workbook's default font, bold (appended once, then reused)."""
        self._ensure("fonts")
        fonts = self._items("fonts")
        p = self.prefix
        fid = self.default_font_id()
        base = fonts[fid]
        if re.search(rf"<{re.escape(p)}b(?=[\s/>])", base):
            return fid
        m = re.match(rf"<{re.escape(p)}font\b[^>]*?(/?)>", base)
        if m and m[1]:
            bold = f"<{p}font><{p}b/></{p}font>"
        else:
            bold = base[: m.end()] + f"<{p}b/>" + base[m.end():] if m else base
        if bold in fonts:
            return fonts.index(bold)
        return self._append("fonts", bold)

    def xf(self, num_fmt_id: int = 0, font_id: int = 0) -> int:
        """Index in ``cellXfs`` of a plain style with this number format and font."""
        for name in ("fonts", "fills", "borders", "cellStyleXfs", "cellXfs", "cellStyles"):
            self._ensure(name)  # what the new xf refers to by index 0
        p = self.prefix
        parts = [f'<{p}xf numFmtId="{num_fmt_id}" fontId="{font_id}" fillId="0" borderId="0" '
                 'xfId="0"']
        if num_fmt_id:
            parts.append(' applyNumberFormat="1"')
        if font_id:
            parts.append(' applyFont="1"')
        element = "".join(parts) + "/>"
        existing = self._items("cellXfs")
        if element in existing:
            return existing.index(element)
        return self._append("cellXfs", element)

    def finish(self) -> bytes:
        """The styles part as bytes."""
        return (self.head + "".join(t for _, t in self.pieces) + self.tail).encode("utf-8")


def minimal_styles(plain: int = 1) -> bytes:
    """:data:`MINIMAL_STYLES` with ``plain`` plain cell styles (at least one).

    Examples
    --------
    >>> minimal_styles(3).count(b'<xf numFmtId="0" fontId="0" fillId="0" borderId="0" xfId="0"/>')
    3
    """
    plain = max(plain, 1)
    one = b'<xf numFmtId="0" fontId="0" fillId="0" borderId="0" xfId="0"/>'
    return MINIMAL_STYLES.replace(b'<cellXfs count="1">' + one,
                                  b'<cellXfs count="%d">' % plain + one * plain)


MINIMAL_STYLES = (
    b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    b'<styleSheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
    b'<fonts count="1"><font><sz val="11"/><name val="Calibri"/></font></fonts>'
    b'<fills count="2"><fill><patternFill patternType="none"/></fill>'
    b'<fill><patternFill patternType="gray125"/></fill></fills>'
    b'<borders count="1"><border><left/><right/><top/><bottom/><diagonal/></border></borders>'
    b'<cellStyleXfs count="1"><xf numFmtId="0" fontId="0" fillId="0" borderId="0"/></cellStyleXfs>'
    b'<cellXfs count="1"><xf numFmtId="0" fontId="0" fillId="0" borderId="0" xfId="0"/></cellXfs>'
    b'<cellStyles count="1"><cellStyle name="Normal" xfId="0" builtinId="0"/></cellStyles>'
    b"</styleSheet>"
)
