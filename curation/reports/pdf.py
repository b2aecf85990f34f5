"""PDF pieces every report shares (fpdf2: pure Python, no system libraries).

The built-in PDF fonts cover Latin-1 only, so text is folded to it (e⁻ becomes e-).
"""

from __future__ import annotations

from typing import Any

from fpdf import FPDF
from fpdf.fonts import FontFace

FOLD = str.maketrans({"⁻": "-", "²": "2", "³": "3", "—": "-", "–": "-", "·": ".", "→": "->",
                      "≈": "~", "…": "...", "▶": ">"})


def latin(text: Any) -> str:
    """Text the built-in fonts can print."""
    return str(text).translate(FOLD).encode("latin-1", "replace").decode("latin-1")


def document(title: str) -> FPDF:
    """A landscape A4 document with its title printed on the first page."""
    pdf = FPDF(orientation="landscape", format="A4")
    pdf.set_auto_page_break(auto=True, margin=12)
    pdf.add_page()
    pdf.set_font("Helvetica", "B", 16)
    pdf.multi_cell(0, 9, latin(title), new_x="LMARGIN", new_y="NEXT")
    return pdf


def heading(pdf: FPDF, text: str) -> None:
    """A section heading; body text after it in the small font."""
    pdf.set_font("Helvetica", "B", 13)
    pdf.ln(3)
    pdf.multi_cell(0, 7, latin(text), new_x="LMARGIN", new_y="NEXT")
    pdf.set_font("Helvetica", "", 8)


def table(pdf: FPDF, rows: list[dict[str, Any]], columns: list[str]) -> None:
    """The chosen columns of report rows as a table; "None recorded." when empty."""
    if not rows:
        pdf.multi_cell(0, 5, "None recorded.", new_x="LMARGIN", new_y="NEXT")
        return
    with pdf.table(headings_style=FontFace(emphasis="BOLD"), line_height=4,
                   text_align="LEFT") as grid:
        grid.row([latin(c.replace("_", " ")) for c in columns])
        for row in rows:
            grid.row([latin(row.get(c, ""))[:300] for c in columns])
