"""The lineage report: contents, CSV shapes, and a query count that does not grow."""

from __future__ import annotations

import csv
import io
import re
import zipfile

from sqlalchemy import event

from curation import history
from curation.reports import lineage, lineage_pdf, lineage_tables


def _statements(engine, session, code: str) -> tuple[int, lineage.LineageReport]:
    seen: list[str] = []

    def count(conn, cursor, statement, *args) -> None:  # type: ignore[no-untyped-def]
        seen.append(statement)

    session.expunge_all()  # nothing cached: every row must come from a query
    event.listen(engine, "before_cursor_execute", count)
    try:
        report = lineage.build(session, code)
        lineage_tables.tables(report)
    finally:
        event.remove(engine, "before_cursor_execute", count)
    return len(seen), report


def test_report_contents(session, make_family) -> None:
    particle = make_family("LR-A", 3)
    report = lineage.build(session, "LR-A-N1")  # any member leads to its particle
    assert report.particle.id == particle.id
    assert {m.node.item.code for m in report.descendants} == {
        *(f"LR-A-L{n}" for n in range(3)), *(f"LR-A-N{n}" for n in range(3))}
    tables = lineage_tables.tables(report)
    files = [r["files"] for r in tables["steps"] if r["files"]]
    assert len(files) == 3 and all("sha256:" + "ab" * 32 in f for f in files)
    held = {r["code"]: r["held_in"] for r in tables["items"]}
    assert held["LR-A-L0"].startswith("LR-A-G")
    needles = {r["item"]: r for r in tables["mass_budget"] if "-N" in r["item"]}
    assert needles["LR-A-N0"]["remaining_ug"] == "0"  # the APT run used it up
    assert report.budget.exposure.electron_e_per_A2 > 0


def test_queries_do_not_grow_with_descendants(engine, session, make_family) -> None:
    make_family("LR-S", 15)
    make_family("LR-B", 500)
    small, report_small = _statements(engine, session, "LR-S")
    large, report_large = _statements(engine, session, "LR-B")
    assert len(report_small.descendants) == 30 and len(report_large.descendants) == 1000
    assert large == small, (small, large)


def test_csv_shapes(session, make_family) -> None:
    make_family("LR-C", 2)
    report = lineage.build(session, "LR-C")
    rows = list(csv.DictReader(io.StringIO(lineage_tables.as_csv(report))))
    assert {r["table"] for r in rows} >= {"items", "steps", "mass_budget", "dose_budget"}
    assert sum(1 for r in rows if r["table"] == "items") == 5
    with zipfile.ZipFile(io.BytesIO(lineage_tables.as_zip(report))) as z:
        assert "LR-C-steps.csv" in z.namelist()
        assert z.read("LR-C-items.csv").decode().startswith("code,kind,status")


def test_pdf_has_pages_and_the_tree(session, make_family) -> None:
    make_family("LR-P", 2)
    pdf = lineage_pdf.render(lineage.build(session, "LR-P"))
    assert pdf.startswith(b"%PDF-") and re.findall(rb"/Type\s*/Page(?!s)", pdf)
    assert b"/Subtype /Image" in pdf


def test_tree_matches_the_resolver(session, make_family) -> None:
    particle = make_family("LR-T", 2)
    report = lineage.build(session, "LR-T")
    below = {d for d, _, _ in history.descendants(session, [particle.id])}
    assert {m.node.item.id for m in report.descendants} == below
