"""The lineage report's tables as plain rows, for CSV, PDF and tests.

CSV comes in two shapes, chosen by the file name: a `.zip` holding one CSV per table, or a
single `.csv` whose first column names the table and whose header is the union of every
table's columns (empty where a table has no such column).
"""

from __future__ import annotations

import csv
import io
import json
import zipfile
from typing import Any

from curation.audit.mass import Mass, MassBudget
from curation.reports.lineage import LineageReport

Row = dict[str, Any]


def _t(value: Any) -> str:
    return value.isoformat() if hasattr(value, "isoformat") else ("" if value is None else
                                                                     str(value))


def _g(value: float | None) -> str:
    return "" if value is None else f"{value:.6g}"


def members(r: LineageReport) -> list[Row]:
    """Every item of the family with status, place and parent."""
    codes = {n.item.id: n.item.code for n in r.tree}
    return [{"code": m.node.item.code, "kind": m.node.item.kind, "status": m.node.item.status,
             "parent": codes.get(m.node.parent_id or 0, ""), "depth": m.node.depth,
             "held_in": "; ".join(f"{c.code} {p}".strip() for c, p in m.holders),
             "last_place": m.last_place, "material": m.node.item.material}
            for m in r.members]


def steps(r: LineageReport) -> list[Row]:
    """Every step with parameters, dose and data files."""
    return [{"event": s.event.id, "item": s.event.item.code, "technique": s.event.technique,
             "started": _t(s.event.occurred_at), "ended": _t(s.event.ended_at),
             "operator": s.event.actor.username,
             "instrument": (s.event.station.instrument.code if s.event.station
                            and s.event.station.instrument else ""),
             "superseded": "yes" if s.superseded else "",
             "electron_dose_e_per_A2": _g(s.dose.electron_dose_e_per_A2 if s.dose else None),
             "ion_fluence_ions_per_cm2": _g(s.dose.ion_fluence_ions_per_cm2 if s.dose else None),
             "xray_s": _g(s.dose.xray_seconds if s.dose else None),
             "parameters": json.dumps(s.event.details or {}, sort_keys=True),
             "files": "; ".join(f"{f.original_name} sha256:{f.sha256}" for f in s.files)}
            for s in r.steps]


def _events(events: list[Any]) -> list[Row]:
    return [{"event": e.id, "item": e.item.code, "at": _t(e.occurred_at),
             "until": _t(e.ended_at), "action": e.action or e.environment or "",
             "by": e.actor.username, "place": e.location.name if e.location else "",
             "summary": e.summary, "details": json.dumps(e.details or {}, sort_keys=True)}
            for e in events]


def _mass(m: Mass | None) -> str:
    return "" if m is None else f"{m.ug:.6g}"


def mass_rows(r: LineageReport) -> list[Row]:
    """The mass budget of every family item that has a mass."""
    budgets: list[MassBudget] = [m.mass for m in r.members if m.mass.initial is not None]
    return [{"item": b.item.code, "initial_ug": _mass(b.initial),
             "initial_u_ug": _g(b.initial.u_ug if b.initial else None),
             "method": b.initial.method if b.initial else "",
             "density_g_per_cm3": _g(b.density.g_per_cm3 if b.density else None),
             "density_source": f"{b.density.mineral}: {b.density.source}" if b.density else "",
             "children_ug": _mass(b.extracted), "milled_ug": _mass(b.milled),
             "consumed_ug": _mass(b.consumed), "remaining_ug": _mass(b.remaining),
             "remaining_method": b.remaining.method if b.remaining else "",
             "conserved": "yes" if b.is_conserved() else "NO"} for b in budgets]


def budget_rows(r: LineageReport) -> list[Row]:
    """The particle's exposure and dose totals beside their limits."""
    rows = [{"quantity": lim.name, "total": _g(lim.total), "limit": _g(lim.limit),
             "unit": lim.unit, "limit_source": lim.source,
             "over": "OVER" if lim.is_over else ""} for lim in r.budget.limits]
    rows += [{"quantity": f"electron dose, {name}", "total": _g(v), "limit": "", "unit": "e⁻/Å²",
              "limit_source": "", "over": ""}
             for name, v in r.budget.exposure.electron_by_technique.items()]
    return rows


def findings(r: LineageReport) -> list[Row]:
    """The family's findings with their dispositions."""
    return [{"code": f.code, "severity": f.severity, "item": f.item_code, "message": f.message,
             "evidence": " ".join(map(str, f.evidence)),
             "disposition": d.decision if d else "open", "reason": d.reason if d else ""}
            for f, d in r.findings]


def controls(r: LineageReport) -> list[Row]:
    """Controls that travelled with the particle."""
    return [{"code": item.code, "kind": item.kind, "status": item.status, "why": why}
            for item, why in r.controls]


def tables(r: LineageReport) -> dict[str, list[Row]]:
    """Every table of the report, by name."""
    return {"items": members(r), "steps": steps(r), "custody": _events(r.custody),
            "handling": _events(r.handling), "controls": controls(r),
            "findings": findings(r), "dose_budget": budget_rows(r), "mass_budget": mass_rows(r)}


def _csv(rows: list[Row], columns: list[str]) -> str:
    out = io.StringIO()
    writer = csv.DictWriter(out, fieldnames=columns, lineterminator="\n")
    writer.writeheader()
    writer.writerows(rows)
    return out.getvalue()


def _columns(rows: list[Row]) -> list[str]:
    return list(dict.fromkeys(k for row in rows for k in row))


def as_zip(r: LineageReport) -> bytes:
    """One CSV per table, in a zip."""
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as z:
        for name, rows in tables(r).items():
            z.writestr(f"{r.particle.code}-{name}.csv", _csv(rows, _columns(rows)))
    return out.getvalue()


def as_csv(r: LineageReport) -> str:
    """Every table in one CSV: a `table` column first, then the union of the columns."""
    named = [{"table": name, **row} for name, rows in tables(r).items() for row in rows]
    return _csv(named, _columns(named) or ["table"])
