"""The allocation report as a PDF, with the lineage report's fpdf2 helpers (Latin-1 text)."""

from __future__ import annotations

from fpdf import FPDF

from curation.reports import allocation_tables
from curation.reports.allocation import AllocationReportData
from curation.reports.pdf import document, heading, latin, table

#: the columns printed for each table (the CSV has them all)
PRINTED = {
    "accounting": ["item", "issued_ug", "consumed_ug", "remaining_ug", "transferred_ug",
                   "returned_ug", "lost_ug", "discrepancy_ug", "u_ug", "unaccounted",
                   "balanced"],
    "parts": ["issued_item", "item", "term", "mass_ug", "backed_by", "events"],
    "items": ["code", "kind", "status", "parent", "mass_ug", "where"],
    "subsamples": ["parent", "child", "kind", "made"],
    "techniques": ["technique", "steps", "instrument_hours"],
    "steps": ["event", "item", "technique", "started", "ended", "operator"],
    "files": ["item", "name", "size_bytes", "sha256"],
    "findings": ["code", "severity", "item", "message", "disposition"],
    "controls": ["study", "controls", "readings", "failed_readings", "items_at_risk"],
    "outputs": ["kind", "doi", "doi_format", "title", "year"],
    "remaining": ["item", "mass_ug", "where", "state"],
    "returns": ["item", "mass_ug", "returned"],
}
TITLES = {
    "accounting": "Accounting: issued = consumed + remaining + transferred + returned + lost (ug)",
    "parts": "What backs each term", "items": "Items and where they are",
    "subsamples": "Subsamples made", "techniques": "Steps per technique",
    "steps": "Steps", "files": "Data files", "findings": "Findings and dispositions",
    "controls": "Contamination controls", "outputs": "Publications and data (DOI)",
    "remaining": "What remains and where", "returns": "Returned to the facility",
}


def _identity(pdf: FPDF, r: AllocationReportData) -> None:
    a = r.allocation
    period = (f"{r.period.period_start:%Y-%m-%d} to {r.period.period_end:%Y-%m-%d}"
              if r.period else "the whole loan")
    expires = a.expires_at.strftime("%Y-%m-%d") if a.expires_at else "-"
    lines = [f"Facility: {a.facility}; approved by {a.approving_body or '-'}",
             f"Investigator: {a.investigator.name}; laboratory: {a.laboratory or '-'}",
             f"Starts {a.starts_at:%Y-%m-%d}; expires {expires}",
             f"Period: {period}; accounting as of {r.now:%Y-%m-%d %H:%M} UTC",
             f"Members: {', '.join(m.person.name + ' (' + m.role + ')' for m in r.members) or '-'}"]
    lines += [f"Transfer {t.reference} to {t.laboratory}" for t in r.transfers]
    pdf.set_font("Helvetica", "", 10)
    for line in lines:
        pdf.multi_cell(0, 5, latin(line), new_x="LMARGIN", new_y="NEXT")


def render(r: AllocationReportData) -> bytes:
    """The whole report as PDF bytes."""
    pdf = document(f"Allocation report: {r.allocation.reference}")
    _identity(pdf, r)
    for name, rows in allocation_tables.tables(r).items():
        heading(pdf, TITLES[name])
        table(pdf, rows, PRINTED[name])
    return bytes(pdf.output())
