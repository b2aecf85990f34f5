"""The controls report as a PDF (fpdf2), with the same tables as the page."""

from __future__ import annotations

from typing import Any

from curation.reports.controls import ControlsReport
from curation.reports.pdf import document, heading, table


def reading_rows(r: ControlsReport) -> list[dict[str, Any]]:
    """Every control reading with its verdict."""
    codes = {c.id: c.code for c in r.controls}
    return [{"control": codes[cid], "indicator": row.indicator.code,
             "measured": f"{row.event.occurred_at:%Y-%m-%d %H:%M} UTC",
             "value": f"{row.event.details['value']:g} +/- {row.event.details['uncertainty']:g}",
             "unit": row.indicator.unit, "z": f"{row.verdict.z:.2f}",
             "limit": f"{row.verdict.limit:.3g}", "verdict": "pass" if row.verdict.passed else "FAIL"}
            for cid, rows in r.readings.items() for row in rows]


def risk_rows(r: ControlsReport) -> list[dict[str, Any]]:
    """Every item at risk from every failure, with the chain that links it."""
    return [{"failure": f"event {f.reading.event.id}", "item": item.code, "kind": item.kind,
             "depth": risk.depth,
             "linked by": " / ".join(f"{link.kind} ({link.description})" for link in risk.path)}
            for f in r.failures for item, risk in f.at_risk]


def render(r: ControlsReport) -> bytes:
    """The whole controls report as PDF bytes."""
    pdf = document(f"Contamination controls: {r.study.code}")
    heading(pdf, "Indicators")
    table(pdf, [{"code": i.code, "name": i.name, "unit": i.unit,
                  "baseline": f"{i.baseline_value:g} +/- {i.baseline_uncertainty:g}",
                  "threshold": f"{i.threshold_kind} {i.threshold_value:g}",
                  "source": i.baseline_source} for i in r.indicators],
           ["code", "name", "unit", "baseline", "threshold", "source"])
    heading(pdf, "Readings")
    table(pdf, reading_rows(r), ["control", "indicator", "measured", "value", "unit", "z",
                                  "limit", "verdict"])
    heading(pdf, "Items that shared an exposure with a failed control")
    table(pdf, risk_rows(r), ["failure", "item", "kind", "depth", "linked by"])
    return bytes(pdf.output())
