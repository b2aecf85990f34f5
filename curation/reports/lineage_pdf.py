"""The lineage report as a PDF (fpdf2: pure Python, no system libraries).

The tree is embedded as a PNG drawn from the same layout as the page's SVG; a family too large for a
page gets the item table instead of a picture.
"""

from __future__ import annotations

import io

from fpdf import FPDF
from PIL import Image

from curation.reports import lineage_tables, plots
from curation.reports.lineage import LineageReport
from curation.reports.pdf import document, heading, latin, table

#: beyond this many leaves the picture would be unreadable on paper
MAX_TREE_ROWS = 60
#: the columns printed for each table (the CSV has them all)
PRINTED = {
    "items": ["code", "kind", "status", "parent", "held_in", "last_place"],
    "steps": ["event", "item", "technique", "started", "operator", "superseded",
              "electron_dose_e_per_A2",
              "ion_fluence_ions_per_cm2", "xray_s", "files"],
    "custody": ["event", "item", "at", "action", "by", "place"],
    "handling": ["event", "item", "at", "until", "action", "place", "summary"],
    "controls": ["code", "kind", "status", "why"],
    "findings": ["code", "severity", "item", "message", "disposition"],
    "dose_budget": ["quantity", "total", "limit", "unit", "over", "limit_source"],
    "mass_budget": ["item", "initial_ug", "method", "children_ug", "milled_ug", "consumed_ug",
                    "remaining_ug", "conserved"],
}
TITLES = {"items": "Every item of the family", "steps": "Steps, doses and data files",
          "custody": "Chain of custody", "handling": "Handling and exposure",
          "controls": "Controls that travelled with it", "findings": "Findings (particle and descendants)",
          "dose_budget": "Exposure and dose budget (particle)",
          "mass_budget": "Mass budget (ug)"}


def _identity(pdf: FPDF, r: LineageReport) -> None:
    p = r.particle
    lines = [f"{p.code}: {p.kind}, {p.status}", f"Material: {p.material or '-'}",
             (f"Mass: {p.mass_ug if p.mass_ug is not None else 'not measured'} ug "
             f"({p.mass_method or '-'})"), f"Items cut from it: {len(r.descendants)}"]
    lines += [f"Allocation {a.allocation.reference} from {a.allocation.facility}, issued "
              f"{a.issued_at:%Y-%m-%d}, allocated {a.allocated_mass_ug} ug"
              for a in r.allocations]
    lines += [f"Study {s.study.code} ({s.role}): {s.study.title}" for s in r.studies]
    pdf.set_font("Helvetica", "", 10)
    for line in lines:
        pdf.multi_cell(0, 5, latin(line), new_x="LMARGIN", new_y="NEXT")


def _tree(pdf: FPDF, r: LineageReport) -> None:
    leaves = sum(1 for n in r.tree if not any(m.parent_id == n.item.id for m in r.tree))
    if leaves > MAX_TREE_ROWS:
        pdf.multi_cell(0, 5, f"{len(r.tree)} items: too many to draw on a page; see the item "
                       "table.", new_x="LMARGIN", new_y="NEXT")
        return
    png = plots.tree_png(r.tree, current_id=r.particle.id)
    with Image.open(io.BytesIO(png)) as picture:
        ratio = picture.width / picture.height
    room = pdf.h - pdf.b_margin - pdf.get_y()
    if room < 60:  # millimetres: too little for a readable picture on this page
        pdf.add_page()
        room = pdf.eph
    pdf.image(io.BytesIO(png), w=min(pdf.epw, room * ratio))


def render(r: LineageReport) -> bytes:
    """The whole report as PDF bytes."""
    pdf = document(f"Lineage report: {r.particle.code}")
    _identity(pdf, r)
    heading(pdf, "Lineage tree")
    _tree(pdf, r)
    for name, rows in lineage_tables.tables(r).items():
        heading(pdf, TITLES[name])
        table(pdf, rows, PRINTED[name])
    return bytes(pdf.output())
