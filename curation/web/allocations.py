"""Allocation pages: the dashboard of what is due, one allocation with the forms that record
its members, periods, returns, transfers and outputs, and the allocation report."""

from __future__ import annotations

import re
from typing import Any

from flask import Blueprint, Response, abort, flash, redirect, render_template, request, url_for
from flask_wtf import FlaskForm
from markupsafe import Markup
from sqlalchemy import select
from sqlalchemy.orm import Session
from werkzeug.wrappers import Response as WerkzeugResponse

from curation.errors import CurationError, InvalidInput
from curation.model import Allocation, AllocationReport, Event
from curation.reports import allocation as report
from curation.reports import allocation_pdf, allocation_svg, allocation_tables
from curation.services import allocations as writes
from curation.services.common import item_by_code, person_by_username
from curation.web.allocation_forms import FORMS
from curation.web.app import db_session
from curation.web.forms import attach_error, operator_choices

bp = Blueprint("allocations", __name__)


@bp.get("/allocations")
def dashboard() -> str:
    """Every allocation with what is overdue and what is due within 30 days."""
    return render_template("allocations/dashboard.html", rows=report.dashboard(db_session()),
                           soon=report.SOON_DAYS)


def _forms(session: Session, a: Allocation, posted: str | None = None) -> dict[str, FlaskForm]:
    """Every form, choices filled in; only the posted one reads the request."""
    people = operator_choices(session)
    built: dict[str, Any] = {}
    for name, (form_class, _) in FORMS.items():
        form = form_class(prefix=name, **({} if name == posted else {"formdata": None}))
        for field in ("operator", "person", "investigator"):
            if field in form:
                form[field].choices = people
        built[name] = form
    built["submit"].report.choices = [("", "— choose —")] + [
        (str(r.id), f"{r.period_start:%Y-%m-%d} to {r.period_end:%Y-%m-%d}")
        for r in session.scalars(_open_reports(a))]
    return built


def _open_reports(a: Allocation) -> Any:
    return select(AllocationReport).where(AllocationReport.allocation_id == a.id,
                                          AllocationReport.submitted_at.is_(None))


def _page(session: Session, reference: str, forms: dict[str, FlaskForm] | None = None) -> str:
    r = report.build(session, reference)
    return render_template("allocations/allocation.html", r=r, headings=FORMS,
                           forms=forms or _forms(session, r.allocation),
                           tables=allocation_tables.tables(r))


@bp.get("/allocations/<reference>")
def allocation_page(reference: str) -> str:
    """One allocation: its accounting, what is due, and the forms that record the rest."""
    return _page(db_session(), reference)


def _record(session: Session, a: Allocation, name: str, form: FlaskForm) -> str:
    """One service call per form; returns what to flash."""
    actor = person_by_username(session, form.operator.data)
    d = form.data
    if name == "member":
        writes.add_member(session, actor=actor, allocation=a,
                          person=person_by_username(session, d["person"]), role=d["role"])
        return f"{d['person']} named on {a.reference} as {d['role']}"
    if name == "period":
        writes.add_reporting_period(session, actor=actor, allocation=a,
                                    period_start=d["period_start"], period_end=d["period_end"],
                                    due_at=d["due_at"])
        return "Reporting period added"
    if name == "submit":
        row = next((r for r in session.scalars(_open_reports(a)) if str(r.id) == d["report"]),
                   None)
        if row is None:
            raise InvalidInput("report", d["report"], "a period whose report is not yet sent")
        writes.submit_report(session, actor=actor, report=row, submitted_at=d["submitted_at"])
        return "Report recorded as sent"
    return _record_item(session, a, name, d, actor)


def _record_item(session: Session, a: Allocation, name: str, d: dict[str, Any],
                 actor: Any) -> str:
    if name == "return":
        event = session.get(Event, d["event_id"]) if d["event_id"] else None
        if d["event_id"] and event is None:
            raise InvalidInput("event_id", d["event_id"], "the id of a recorded custody event")
        writes.record_return(session, actor=actor, allocation=a,
                             item=item_by_code(session, d["item"].strip()),
                             returned_at=d["returned_at"], mass_ug=d["mass_ug"],
                             condition=d["condition"] or "", event=event, due_at=d["due_at"])
        return f"Return of {d['item']} recorded"
    if name == "transfer":
        codes = [c for c in re.split(r"[\s,]+", d["items"]) if c]
        writes.transfer(session, actor=actor, allocation=a, reference=d["reference"],
                        laboratory=d["laboratory"],
                        investigator=person_by_username(session, d["investigator"]),
                        items=[item_by_code(session, c) for c in codes], issued_at=d["issued_at"])
        return f"Transfer {d['reference']} recorded"
    writes.add_output(session, actor=actor, allocation=a, kind=d["kind"], doi=d["doi"],
                      title=d["title"], year=d["year"])
    return f"{d['kind'].capitalize()} {d['doi']} added"


@bp.post("/allocations/<reference>/<name>")
def record(reference: str, name: str) -> WerkzeugResponse | tuple[str, int]:
    """Record one thing about the allocation, then show it again."""
    if name not in FORMS:
        abort(404)
    session = db_session()
    a = writes.allocation_by_reference(session, reference)
    forms = _forms(session, a, posted=name)
    form = forms[name]
    if not form.validate_on_submit():
        return _page(session, reference, forms), 400
    try:
        said = _record(session, a, name, form)
    except CurationError as exc:
        attach_error(form, exc, {"event": "event_id", "items": "items", "item": "item"})
        return _page(session, reference, forms), 400
    flash(said)
    return redirect(url_for("allocations.allocation_page", reference=reference) + f"#{name}")


def _period() -> int | None:
    raw = request.args.get("period", "")
    if not raw:
        return None
    if not raw.isdigit():
        raise InvalidInput("period", raw, "the number of a reporting period")
    return int(raw)


def report_html(r: report.AllocationReportData) -> str:
    """The report page (also written to a file by the CLI)."""
    return render_template(
        "allocations/report.html", r=r, tables=allocation_tables.tables(r),
        mass=Markup(allocation_svg.mass_svg(r.accounts, f"Mass budget of {r.allocation.reference}")),
        hours=Markup(allocation_svg.hours_svg(r.techniques, "Instrument time per technique")))


@bp.get("/allocations/<reference>/report")
def report_page(reference: str) -> str:
    """The allocation report for screen and print, for the whole loan or one period."""
    return report_html(report.build(db_session(), reference, _period()))


def _download(body: bytes | str, media_type: str, name: str) -> Response:
    return Response(body, mimetype=media_type,
                    headers={"Content-Disposition": f'attachment; filename="{name}"'})


@bp.get("/allocations/<reference>/report.pdf")
def report_pdf(reference: str) -> Response:
    """The allocation report as PDF."""
    r = report.build(db_session(), reference, _period())
    return _download(allocation_pdf.render(r), "application/pdf", f"allocation-{reference}.pdf")


@bp.get("/allocations/<reference>/report.csv")
def report_csv(reference: str) -> Response:
    """The allocation report's tables in one CSV."""
    r = report.build(db_session(), reference, _period())
    return _download(allocation_tables.as_csv(r), "text/csv", f"allocation-{reference}.csv")


def render_html(r: report.AllocationReportData) -> str:
    """The report page as a file, outside any request (for the CLI)."""
    from curation import create_app

    app = create_app({"DATABASE_URL": "sqlite://", "SECRET_KEY": "offline"})
    with app.test_request_context():
        return report_html(r)
