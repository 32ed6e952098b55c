"""Appending number formats and a bold header style to ``xl/styles.xml``.

Only appends: existing ``numFmt`` ids, fonts and ``cellXfs`` indices never move, so
every existing ``s="..."`` keeps meaning what it meant. An ``xf`` that is already
there (from an earlier fill) is reused instead of appended again.
"""

from __future__ import annotations

import re

from sheetvol.workbook._sheetxml import escape_text, unescape

# Built-in number formats whose ids mean the same in every locale (ECMA-376 Part 1,
# 18.8.30). Locale-dependent ones (dates, currency) get a custom id instead.
BUILTIN_FORMATS = {"General": 0, "0": 1, "0.00": 2, "#,##0": 3, "#,##0.00": 4, "0%": 9,
                   "0.00%": 10, "0.00E+00": 11, "@": 49}
FIRST_CUSTOM_ID = 164

_ROOT = re.compile(rb"<([A-Za-z_][\w.\-]*:)?styleSheet(?=[\s>])")


class StyleBook:
    """Edits one styles part as text; call :meth:`finish` for the new bytes."""

    def __init__(self, data: bytes) -> None:
        m = _ROOT.search(data)
        self.prefix = (m[1] or b"").decode() if m else ""
        self.text = data.decode("utf-8")
        self.changed = False

    def _block(self, name: str) -> re.Match[str] | None:
        p = re.escape(self.prefix)
        return re.search(rf"<{p}{name}(?=[\s>/])([^>]*?)(/>|>(.*?)</{p}{name}>)", self.text, re.S)

    def _items(self, name: str, item: str) -> list[str]:
        m = self._block(name)
        if not m or m[3] is None:
            return []
        p = re.escape(self.prefix)
        return [x[0] for x in re.finditer(rf"<{p}{item}(?=[\s>/])[^>]*?(/>|>.*?</{p}{item}>)",
                                          m[3], re.S)]

    def _append(self, name: str, element: str, before: tuple[str, ...]) -> int:
        """Append ``element`` to block ``name`` (creating it); return its index."""
        p = self.prefix
        m = self._block(name)
        if m is None:
            where = len(self.text) - len(f"</{p}styleSheet>")
            for nxt in before:
                mb = re.search(rf"<{re.escape(p)}{nxt}(?=[\s>/])", self.text)
                if mb:
                    where = mb.start()
                    break
            self.text = (self.text[:where] + f'<{p}{name} count="1">{element}</{p}{name}>'
                         + self.text[where:])
            self.changed = True
            return 0
        count = len(self._items(name, _ITEM[name]))
        attrs = re.sub(r'\s+count\s*=\s*["\']\d*["\']', "", m[1]) + f' count="{count + 1}"'
        inner = m[3] or ""
        new = f"<{p}{name}{attrs}>{inner}{element}</{p}{name}>"
        self.text = self.text[: m.start()] + new + self.text[m.end():]
        self.changed = True
        return count

    def number_format_id(self, code: str) -> int:
        """Id of ``code``: built-in, already defined, or newly appended."""
        if code in BUILTIN_FORMATS:
            return BUILTIN_FORMATS[code]
        ids = []
        for el in self._items("numFmts", "numFmt"):
            mid = re.search(r'numFmtId\s*=\s*["\'](\d+)', el)
            mcode = re.search(r'formatCode\s*=\s*(["\'])(.*?)\1', el, re.S)
            if mid:
                ids.append(int(mid[1]))
                if mcode and unescape(mcode[2].encode()) == code:
                    return int(mid[1])
        new_id = max([FIRST_CUSTOM_ID - 1, *ids]) + 1
        self._append("numFmts", f'<{self.prefix}numFmt numFmtId="{new_id}" '
                     f'formatCode="{escape_text(code)}"/>',
                     ("fonts", "fills", "borders", "cellStyleXfs", "cellXfs"))
        return new_id

    def bold_font_id(self) -> int:
        """A font like the default one but bold (appended once, then reused)."""
        fonts = self._items("fonts", "font")
        p = self.prefix
        base = fonts[0] if fonts else f'<{p}font><{p}sz val="11"/></{p}font>'
        if re.search(rf"<{re.escape(p)}b(\s|/|>)", base):
            return 0
        m = re.match(rf"<{re.escape(p)}font\b[^>]*?(/?)>", base)
        if m and m[1]:
            bold = f"<{p}font><{p}b/></{p}font>"
        else:
            bold = base[: m.end()] + f"<{p}b/>" + base[m.end():] if m else base
        if bold in fonts:
            return fonts.index(bold)
        return self._append("fonts", bold, ("fills", "borders", "cellStyleXfs", "cellXfs"))

    def xf(self, num_fmt_id: int = 0, font_id: int = 0) -> int:
        """Index in ``cellXfs`` of a plain style with this number format and font."""
        p = self.prefix
        parts = [f'<{p}xf numFmtId="{num_fmt_id}" fontId="{font_id}" fillId="0" borderId="0" '
                 'xfId="0"']
        if num_fmt_id:
            parts.append(' applyNumberFormat="1"')
        if font_id:
            parts.append(' applyFont="1"')
        element = "".join(parts) + "/>"
        existing = self._items("cellXfs", "xf")
        if element in existing:
            return existing.index(element)
        return self._append("cellXfs", element, ("cellStyles", "dxfs", "tableStyles", "colors",
                                                 "extLst"))

    def finish(self) -> bytes:
        """The styles part as bytes."""
        return self.text.encode("utf-8")


_ITEM = {"numFmts": "numFmt", "fonts": "font", "cellXfs": "xf"}

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
