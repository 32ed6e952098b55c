"""Native line charts: the chart part, its drawing anchor and the sheet's ``<drawing>``.

The chart refers to the sheet's cells (no cached values), so any spreadsheet program
draws it from the data; element order follows the DrawingML chart schema (ECMA-376
Part 1, 21.2), as laid out in the comments beside each group.
"""

from __future__ import annotations

import re

from sheetvol.workbook._sheetxml import col_letters, escape_text, parse_ref
from sheetvol.workbook.edits import LineChart

NS_C = "http://schemas.openxmlformats.org/drawingml/2006/chart"
NS_A = "http://schemas.openxmlformats.org/drawingml/2006/main"
NS_XDR = "http://schemas.openxmlformats.org/drawingml/2006/spreadsheetDrawing"
NS_R = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
CT_CHART = "application/vnd.openxmlformats-officedocument.drawingml.chart+xml"
CT_DRAWING = "application/vnd.openxmlformats-officedocument.drawing+xml"
REL_CHART = NS_R + "/chart"
REL_DRAWING = NS_R + "/drawing"
CHART_ROWS, CHART_COLS = 20, 12  # size of the anchor box in cells
# worksheet children that come after <drawing> (ECMA-376 Part 1, 18.3.1.99 CT_Worksheet)
AFTER_DRAWING = ("legacyDrawing", "legacyDrawingHF", "drawingHF", "picture", "oleObjects",
                 "controls", "webPublishItems", "tableParts", "extLst")


def sheet_ref(sheet: str, col: int, top: int, bottom: int | None = None) -> str:
    """An absolute reference such as ``'My Sheet'!$E$2:$E$300``."""
    name = "'" + sheet.replace("'", "''") + "'"
    letters = col_letters(col)
    ref = f"{name}!${letters}${top}"
    return ref + (f":${letters}${bottom}" if bottom is not None else "")


def chart_xml(chart: LineChart, date_axis: bool) -> bytes:
    """The chart part of a line chart of ``series_cols`` against ``x_col``."""
    series = []
    for i, col in enumerate(chart.series_cols):
        name = ""
        if chart.first_row > 1:  # the header cell above the data names the series
            head = escape_text(sheet_ref(chart.sheet, col, chart.first_row - 1))
            name = f"<c:tx><c:strRef><c:f>{head}</c:f></c:strRef></c:tx>"
        cat = escape_text(sheet_ref(chart.sheet, chart.x_col, chart.first_row, chart.last_row))
        val = escape_text(sheet_ref(chart.sheet, col, chart.first_row, chart.last_row))
        # CT_LineSer: idx, order, tx, spPr, marker, ..., cat, val, smooth
        series.append(
            f'<c:ser><c:idx val="{i}"/><c:order val="{i}"/>{name}'
            '<c:spPr><a:ln w="15875"><a:round/></a:ln></c:spPr>'
            '<c:marker><c:symbol val="none"/></c:marker>'
            f"<c:cat><c:numRef><c:f>{cat}</c:f></c:numRef></c:cat>"
            f'<c:val><c:numRef><c:f>{val}</c:f></c:numRef></c:val><c:smooth val="0"/></c:ser>')
    x_fmt = chart.x_format or ("yyyy-mm-dd" if date_axis else "General")
    x_linked = "0" if chart.x_format else "1"
    # CT_Scaling: logBase, orientation, max, min (in that order)
    y_scaling = '<c:orientation val="minMax"/>'
    if chart.y_max is not None:
        y_scaling += f'<c:max val="{chart.y_max!r}"/>'
    if chart.y_min is not None:
        y_scaling += f'<c:min val="{chart.y_min!r}"/>'
    # CT_CatAx / CT_DateAx: axId, scaling, delete, axPos, numFmt, tick marks, tickLblPos,
    # crossAx, crosses, then the kind's own elements
    x_kind = "dateAx" if date_axis else "catAx"
    x_tail = ('<c:auto val="1"/><c:lblOffset val="100"/><c:baseTimeUnit val="days"/>'
              if date_axis else '<c:auto val="1"/><c:lblAlgn val="ctr"/><c:lblOffset val="100"/>'
              '<c:noMultiLvlLbl val="0"/>')
    return (
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        f'<c:chartSpace xmlns:c="{NS_C}" xmlns:a="{NS_A}" xmlns:r="{NS_R}">'
        '<c:roundedCorners val="0"/><c:chart>'
        '<c:title><c:tx><c:rich><a:bodyPr/><a:lstStyle/><a:p><a:pPr><a:defRPr sz="1200" b="1"/>'
        f"</a:pPr><a:r><a:rPr lang=\"en-US\" sz=\"1200\" b=\"1\"/><a:t>{escape_text(chart.title)}"
        '</a:t></a:r></a:p></c:rich></c:tx><c:overlay val="0"/></c:title>'
        '<c:autoTitleDeleted val="0"/><c:plotArea><c:layout/>'
        '<c:lineChart><c:grouping val="standard"/><c:varyColors val="0"/>'
        + "".join(series)
        + '<c:marker val="1"/><c:axId val="71000001"/><c:axId val="71000002"/></c:lineChart>'
        f'<c:{x_kind}><c:axId val="71000001"/><c:scaling><c:orientation val="minMax"/>'
        '</c:scaling><c:delete val="0"/><c:axPos val="b"/>'
        f'<c:numFmt formatCode="{escape_text(x_fmt)}" sourceLinked="{x_linked}"/>'
        '<c:majorTickMark val="out"/>'
        '<c:minorTickMark val="none"/><c:tickLblPos val="low"/><c:crossAx val="71000002"/>'
        f'<c:crosses val="autoZero"/>{x_tail}</c:{x_kind}>'
        f'<c:valAx><c:axId val="71000002"/><c:scaling>{y_scaling}</c:scaling>'
        '<c:delete val="0"/><c:axPos val="l"/><c:majorGridlines/>'
        '<c:numFmt formatCode="General" sourceLinked="1"/><c:majorTickMark val="out"/>'
        '<c:minorTickMark val="none"/><c:tickLblPos val="nextTo"/><c:crossAx val="71000001"/>'
        '<c:crosses val="autoZero"/><c:crossBetween val="between"/></c:valAx></c:plotArea>'
        '<c:legend><c:legendPos val="b"/><c:overlay val="0"/></c:legend>'
        '<c:plotVisOnly val="1"/><c:dispBlanksAs val="gap"/></c:chart></c:chartSpace>'
    ).encode("utf-8")


def anchor_xml(cell: str, rid: str, shape_id: int) -> str:
    """A two-cell anchor holding a chart frame, top-left at ``cell``."""
    top, left, _b, _r = parse_ref(cell)
    row0, col0 = top - 1, left - 1
    return (
        '<xdr:twoCellAnchor editAs="oneCell">'
        f"<xdr:from><xdr:col>{col0}</xdr:col><xdr:colOff>0</xdr:colOff><xdr:row>{row0}</xdr:row>"
        "<xdr:rowOff>0</xdr:rowOff></xdr:from>"
        f"<xdr:to><xdr:col>{col0 + CHART_COLS}</xdr:col><xdr:colOff>0</xdr:colOff>"
        f"<xdr:row>{row0 + CHART_ROWS}</xdr:row><xdr:rowOff>0</xdr:rowOff></xdr:to>"
        f'<xdr:graphicFrame macro=""><xdr:nvGraphicFramePr><xdr:cNvPr id="{shape_id}" '
        f'name="sheetvol chart {shape_id}"/><xdr:cNvGraphicFramePr/></xdr:nvGraphicFramePr>'
        '<xdr:xfrm><a:off x="0" y="0"/><a:ext cx="0" cy="0"/></xdr:xfrm><a:graphic>'
        f'<a:graphicData uri="{NS_C}"><c:chart xmlns:c="{NS_C}" xmlns:r="{NS_R}" r:id="{rid}"/>'
        "</a:graphicData></a:graphic></xdr:graphicFrame><xdr:clientData/></xdr:twoCellAnchor>"
    )


def drawing_xml(anchors: list[str]) -> bytes:
    """A drawing part holding ``anchors``."""
    return ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
            f'<xdr:wsDr xmlns:xdr="{NS_XDR}" xmlns:a="{NS_A}">' + "".join(anchors)
            + "</xdr:wsDr>").encode("utf-8")


def add_anchors(drawing: bytes, anchors: list[str]) -> bytes:
    """An existing drawing part with ``anchors`` appended (its own prefix for wsDr kept)."""
    text = drawing.decode("utf-8")
    m = re.search(r"</([\w.\-]+:)?wsDr>\s*$", text)
    if m is None:
        raise ValueError("drawing part without a wsDr end tag")
    root = re.search(r"<([\w.\-]+:)?wsDr\b[^>]*>", text)
    extra = ""
    if root is not None:
        if f'"{NS_XDR}"' not in root[0] or "xmlns:xdr=" not in root[0]:
            extra += f' xmlns:xdr="{NS_XDR}"'
        if "xmlns:a=" not in root[0]:
            extra += f' xmlns:a="{NS_A}"'
    body = "".join(anchors)
    if extra:  # declare our prefixes on each anchor, leaving the root tag alone
        body = body.replace("<xdr:twoCellAnchor ", f"<xdr:twoCellAnchor{extra} ")
    return (text[: m.start()] + body + text[m.start():]).encode("utf-8")


def insert_drawing(tail: bytes, prefix: bytes, rel_prefix: str, rid: str) -> bytes:
    """Put ``<drawing r:id=...>`` into the part of a sheet after ``</sheetData>``."""
    p = re.escape(prefix)
    pos = None
    for name in AFTER_DRAWING:
        m = re.search(rb"<" + p + name.encode() + rb"(?=[\s>/])", tail)
        if m and (pos is None or m.start() < pos):
            pos = m.start()
    if pos is None:
        pos = tail.rindex(b"</" + prefix + b"worksheet>")
    if rel_prefix:
        attr = f'{rel_prefix}:id="{rid}"'
    else:
        attr = f'xmlns:sv_r="{NS_R}" sv_r:id="{rid}"'
    el = b"<" + prefix + b"drawing " + attr.encode() + b"/>"
    return tail[:pos] + el + tail[pos:]


def rel_prefix_of(head: bytes) -> str:
    """The prefix bound to the relationships namespace on the root element, or ''."""
    m = re.search(rb'xmlns:([\w.\-]+)\s*=\s*["\']' + re.escape(NS_R.encode()) + rb'["\']', head)
    return m[1].decode() if m else ""
