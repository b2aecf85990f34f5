"""The auditor's pages: studies, and each study's controls, failures and items at risk."""

from __future__ import annotations

from flask import Blueprint, Response, render_template, request
from markupsafe import Markup
from sqlalchemy import select

from curation.errors import InvalidInput
from curation.model import Study
from curation.reports import controls, controls_pdf
from curation.web.app import db_session

bp = Blueprint("controls", __name__)

#: the deepest tracing the page offers (each level can add many items)
MAX_DEPTH = 4


@bp.get("/studies")
def study_list() -> str:
    """Every study, with a link to its contamination controls."""
    studies = db_session().scalars(select(Study).order_by(Study.code)).all()
    return render_template("reports/studies.html", studies=studies)


def _depth() -> int:
    raw = request.args.get("depth", str(controls.DEFAULT_DEPTH))
    if not raw.isdigit() or not 1 <= int(raw) <= MAX_DEPTH:
        raise InvalidInput("depth", raw, f"a whole number from 1 to {MAX_DEPTH}")
    return int(raw)


def _page(report: controls.ControlsReport, depth: int) -> str:
    plots = {(c.id, i.id): Markup(controls.readings_svg(report.readings[c.id], i))
             for c in report.controls for i in report.indicators}
    return render_template("reports/controls.html", r=report, plots=plots, depth=depth,
                           max_depth=MAX_DEPTH)


@bp.get("/studies/<code>/controls")
def controls_page(code: str) -> str:
    """Each control's readings against its baseline, the failures and the items at risk."""
    depth = _depth()
    return _page(controls.controls_report(db_session(), code, depth), depth)


@bp.get("/studies/<code>/controls.pdf")
def controls_pdf_file(code: str) -> Response:
    """The controls report as PDF."""
    report = controls.controls_report(db_session(), code, _depth())
    return Response(controls_pdf.render(report), mimetype="application/pdf", headers={
        "Content-Disposition": f'attachment; filename="controls-{report.study.code}.pdf"'})


def render_html(report: controls.ControlsReport, depth: int) -> str:
    """The controls page as a file, outside any request (for the CLI)."""
    from curation import create_app

    app = create_app({"DATABASE_URL": "sqlite://", "SECRET_KEY": "offline"})
    with app.test_request_context():
        return _page(report, depth)
