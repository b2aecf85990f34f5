"""The allocation report: tables, CSV, PDF, plots, and a query count that does not grow."""

from __future__ import annotations

import csv
import io
from datetime import timedelta

from sqlalchemy import event

from curation.reports import allocation, allocation_pdf, allocation_svg, allocation_tables
from curation.services import allocations
from tests.conftest import hours


def _loan(session, operator, make_family, reference: str, families: int, lamellae: int):
    a = allocations.open_allocation(session, actor=operator, reference=reference, facility="F",
                                    investigator=operator, starts_at=hours(0))
    allocations.add_member(session, actor=operator, allocation=a, person=operator)
    for n in range(families):
        particle = make_family(f"{reference}-{n}", lamellae)
        allocations.issue_item(session, actor=operator, allocation=a, item=particle,
                               issued_at=hours(0), allocated_mass_ug=2.0)
    allocations.add_output(session, actor=operator, allocation=a, kind="dataset",
                           doi="10.5555/ar-data", title="Data")
    return a


def _statements(engine, session, reference: str) -> tuple[int, allocation.AllocationReportData]:
    seen: list[str] = []

    def count(conn, cursor, statement, *args) -> None:  # type: ignore[no-untyped-def]
        seen.append(statement)

    session.expire_all()
    event.listen(engine, "before_cursor_execute", count)
    try:
        report = allocation.build(session, reference)
        allocation_tables.tables(report)
    finally:
        event.remove(engine, "before_cursor_execute", count)
    return len(seen), report


def test_queries_do_not_grow_with_items(engine, session, operator, make_family) -> None:
    _loan(session, operator, make_family, "AR-S", 1, 1)
    _loan(session, operator, make_family, "AR-B", 4, 5)
    small, r_small = _statements(engine, session, "AR-S")
    large, r_large = _statements(engine, session, "AR-B")
    assert len(r_large.family_items()) == 4 * (1 + 2 * 5) > len(r_small.family_items())
    assert small == large


def test_tables_steps_and_hours(session, operator, make_family) -> None:
    _loan(session, operator, make_family, "AR-T", 1, 2)
    r = allocation.build(session, "AR-T")
    t = allocation_tables.tables(r)
    steps = r.steps
    # instrument hours are the sum of (end - start) of each session, per technique
    by_hand: dict[str, timedelta] = {}
    for e in steps:
        by_hand[e.technique] = by_hand.get(e.technique, timedelta()) + (e.ended_at - e.occurred_at)
    assert {row["technique"]: float(row["instrument_hours"]) for row in t["techniques"]} == {
        k: round(v.total_seconds() / 3600, 2) for k, v in by_hand.items()}
    assert len(t["subsamples"]) == 4 and len(t["files"]) == 2
    assert t["outputs"][0]["doi_format"] == "ok"
    # the family's particle sits in no container and has no custody event: nobody says where
    assert (t["accounting"][0]["balanced"], t["accounting"][0]["unaccounted"]) == ("NO", "AR-T-0")
    rows = list(csv.DictReader(io.StringIO(allocation_tables.as_csv(r))))
    assert {row["table"] for row in rows} >= {"accounting", "parts", "items", "steps"}


def test_pdf_and_plots(session, operator, make_family) -> None:
    _loan(session, operator, make_family, "AR-P", 2, 1)
    r = allocation.build(session, "AR-P")
    assert allocation_pdf.render(r).startswith(b"%PDF-")
    svg = allocation_svg.mass_svg(r.accounts, "mass")
    assert svg.count('class="part part-') >= 2 and "NOT BALANCED" in svg
    assert "h, " in allocation_svg.hours_svg(r.techniques, "hours")
