"""Render docs/img/trade-log.png: the filled demo's Trades sheet, through LibreOffice.

Steps: fill workbooks/demo-desk.xlsx into a temporary folder (the README's demo
command), make a print copy of the Trades sheet only (landscape, fit to one page
wide, the log's exit/quantity/equity, the excursion columns and the two note
columns (blank in the demo) hidden so the rest stays readable), convert that
copy to PDF with LibreOffice headless, and turn page 1 into a PNG with pdftoppm
(poppler-utils). The filled workbook itself is never changed; only the print copy
carries the page settings.

Run ``python workbooks/render_picture.py`` (or ``--out PATH``) from the project root.
"""

from __future__ import annotations

import argparse
import re
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

from openpyxl import load_workbook

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from sheetvol.fill.job import fill_file  # noqa: E402

DEMO = ROOT / "workbooks" / "demo-desk.xlsx"
OUT = ROOT / "docs" / "img" / "trade-log.png"
# Headers of the columns hidden in the picture: the log's exit, exit date, quantity and
# equity, the target in R (about 1.5 throughout), the excursions and the notes (blank in the demo)
HIDDEN = ("Exit", "Exit date", "Quantity", "Equity", "Target in R", "Worst move", "Best move",
          "Worst move in R", "Best move in R", "Size note", "Review note")


def print_copy(filled: Path, dest: Path) -> None:
    """The Trades sheet alone, set up to print on one landscape page."""
    wb = load_workbook(filled)
    for name in wb.sheetnames:
        if name != "Trades":
            del wb[name]
    ws = wb["Trades"]
    for cell in ws[1]:
        if cell.value in HIDDEN:
            ws.column_dimensions[cell.column_letter].hidden = True
    ws.page_setup.orientation = "landscape"
    ws.page_setup.paperSize = ws.PAPERSIZE_A3
    ws.page_setup.fitToWidth = 1
    ws.page_setup.fitToHeight = 1
    ws.sheet_properties.pageSetUpPr.fitToPage = True
    ws.print_area = f"A1:{ws.cell(1, ws.max_column).column_letter}{ws.max_row}"
    ws.print_options.gridLines = True
    ws.page_margins.left = ws.page_margins.right = 0.3
    ws.page_margins.top = ws.page_margins.bottom = 0.3
    wb.save(dest)


def render(out: Path = OUT, resolution: int = 100) -> Path:
    """Fill the demo, print the Trades sheet to PDF and page 1 to ``out`` (PNG)."""
    with tempfile.TemporaryDirectory(prefix="sv-render-") as tmp:
        t = Path(tmp)
        src = t / "demo-desk.xlsx"
        shutil.copy(DEMO, src)
        report = fill_file(src)
        copy = t / "trades-print.xlsx"
        print_copy(report.output, copy)
        profile = (t / "lo-profile").as_uri()
        subprocess.run(["soffice", f"-env:UserInstallation={profile}", "--headless",
                        "--convert-to", "pdf", "--outdir", str(t), str(copy)],
                       check=True, capture_output=True, timeout=180)
        pdf = t / "trades-print.pdf"
        # Crop the page below the last line of text (the words' boxes, in points).
        subprocess.run(["pdftotext", "-bbox", "-f", "1", "-l", "1", str(pdf),
                        str(t / "words.html")], check=True, timeout=60)
        boxes = (t / "words.html").read_text(encoding="utf-8")
        bottom = max(float(y) for y in re.findall(r'yMax="([0-9.]+)"', boxes))
        right = max(float(x) for x in re.findall(r'xMax="([0-9.]+)"', boxes))
        scale = resolution / 72
        subprocess.run(["pdftoppm", "-png", "-r", str(resolution), "-f", "1", "-l", "1",
                        "-x", "0", "-y", "0", "-W", str(int((right + 24) * scale)),
                        "-H", str(int((bottom + 16) * scale)),
                        "-singlefile", str(pdf), str(t / "page")], check=True, timeout=60)
        out.parent.mkdir(parents=True, exist_ok=True)
        shutil.copy(t / "page.png", out)
    return out


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=OUT)
    parser.add_argument("--resolution", type=int, default=100)
    args = parser.parse_args()
    print(render(args.out, args.resolution))
