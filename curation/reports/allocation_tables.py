"""The allocation report's tables as plain rows, for the page, the PDF and the CSV."""

from __future__ import annotations

from typing import Any

from curation.audit import allocations as accounting
from curation.reports.allocation import AllocationReportData, doi_ok
from curation.reports.lineage_tables import _columns, _csv, _g, _t

Row = dict[str, Any]


def accounting_rows(r: AllocationReportData) -> list[Row]:
    """issued = consumed + remaining + transferred + returned + lost, per issued item."""
    rows = []
    for a in r.accounts:
        row: Row = {"item": a.link.item.code, "issued_ug": _g(a.issued.ug),
                    "issued_method": a.issued.method}
        row.update({f"{t}_ug": _g(a.total(t)) for t in accounting.TERMS})
        row.update({"discrepancy_ug": _g(a.discrepancy_ug), "u_ug": _g(a.u_ug),
                    "unaccounted": "; ".join(p.item.code for p in a.unaccounted),
                    "balanced": "yes" if a.is_balanced else "NO"})
        rows.append(row)
    return rows


def part_rows(r: AllocationReportData) -> list[Row]:
    """Every term's share from every item, with the events and rows that back it."""
    return [{"issued_item": a.link.item.code, "item": p.item.code, "term": p.term,
             "mass_ug": _g(p.ug), "u_ug": _g(p.u_ug), "backed_by": p.note,
             "events": " ".join(f"#{e}" for e in p.evidence)}
            for a in r.accounts for p in a.parts]


def item_rows(r: AllocationReportData) -> list[Row]:
    """Every item of the families: kind, status, parent, mass and where it is."""
    parent = r.data.parent_of
    rows = []
    for item in r.family_items():
        where = accounting.whereabouts(r.data, item.id)
        budget = next((a.budgets[item.id] for a in r.accounts if item.id in a.budgets), None)
        rows.append({"code": item.code, "kind": item.kind, "status": item.status,
                     "parent": r.data.items[parent[item.id]].code if item.id in parent else "",
                     "mass_ug": _g(budget.initial.ug if budget and budget.initial else None),
                     "where": where[0] if where else "—"})
    return rows


def step_rows(r: AllocationReportData) -> list[Row]:
    """Every step in the period."""
    return [{"event": e.id, "item": r.data.items[e.item_id].code, "technique": e.technique,
             "started": _t(e.occurred_at), "ended": _t(e.ended_at),
             "operator": e.actor.username} for e in r.steps]


def other_rows(r: AllocationReportData) -> dict[str, list[Row]]:
    """The shorter tables."""
    items = r.data.items
    return {
        "subsamples": [{"parent": items[d.parent_id].code, "child": items[d.child_id].code,
                        "kind": items[d.child_id].kind, "made": _t(d.derived_at),
                        "step": d.step_id or ""} for d in r.subsamples],
        "techniques": [{"technique": t.technique, "steps": t.count,
                        "instrument_hours": f"{t.hours:.2f}"} for t in r.techniques],
        "files": [{"item": f.item.code, "name": f.original_name, "size_bytes": f.size_bytes,
                   "sha256": f.sha256, "event": f.event_id or ""} for f in r.files],
        "findings": [{"code": f.code, "severity": f.severity, "item": f.item_code,
                      "message": f.message, "disposition": d.decision if d else "open",
                      "reason": d.reason if d else ""} for f, d in r.findings],
        "controls": [{"study": c.study_code, "controls": c.controls, "readings": c.readings,
                      "failed_readings": c.failures, "items_at_risk": c.at_risk}
                     for c in r.controls],
        "outputs": [{"kind": o.kind, "doi": o.doi, "doi_format": "ok" if doi_ok(o.doi)
                     else "NOT VALID", "title": o.title, "year": o.year or ""}
                    for o in r.outputs],
        "remaining": [{"item": p.item.code, "mass_ug": _g(p.ug), "where": p.note,
                       "state": "UNACCOUNTED" if p.term == accounting.UNACCOUNTED else "held"}
                      for p in r.remaining],
        "returns": [{"item": p.item.code, "mass_ug": _g(p.ug), "returned": p.note}
                    for p in r.returns],
    }


def tables(r: AllocationReportData) -> dict[str, list[Row]]:
    """Every table of the report, by name."""
    return {"accounting": accounting_rows(r), "parts": part_rows(r), "items": item_rows(r),
            "steps": step_rows(r), **other_rows(r)}


def as_csv(r: AllocationReportData) -> str:
    """Every table in one CSV: a `table` column first, then the union of the columns."""
    named = [{"table": name, **row} for name, rows in tables(r).items() for row in rows]
    return _csv(named, _columns(named) or ["table"])
