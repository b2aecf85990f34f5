"""The auditor's pages: studies, and each study's controls, failures and items at risk."""

from __future__ import annotations

from flask import Blueprint, Response, abort, flash, redirect, render_template, request, url_for
from flask_wtf import FlaskForm
from markupsafe import Markup
from sqlalchemy import select
from sqlalchemy.orm import Session

from curation.errors import CurationError, ImportRejected, InvalidInput
from curation.model import Event, Study, StudyItem
from curation.reports import controls, controls_pdf
from curation.services import controls as control_writes
from curation.services.common import item_by_code, person_by_username
from curation.web import forms as f
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


def _page(report: controls.ControlsReport, depth: int,
          forms: dict[str, FlaskForm] | None = None) -> str:
    plots = {(c.id, i.id): Markup(controls.readings_svg(report.readings[c.id], i))
             for c in report.controls for i in report.indicators}
    return render_template("reports/controls.html", r=report, plots=plots, depth=depth,
                           max_depth=MAX_DEPTH, forms=forms or {})


def reading_forms(session: Session, report: controls.ControlsReport,
                  posted: str | None = None) -> dict[str, FlaskForm]:
    """The reading and import forms, choices filled in; only the posted one reads the request."""
    built: dict[str, FlaskForm] = {}
    for name, form_class in (("reading", f.ControlReadingForm),
                             ("import", f.ControlReadingsFileForm)):
        form = form_class(prefix=name, **({} if name == posted else {"formdata": None}))
        form.operator.choices = f.operator_choices(session)
        built[name] = form
    built["reading"].control.choices = [(c.code, c.code) for c in report.controls]
    built["reading"].indicator.choices = [(i.code, i.name) for i in report.indicators]
    if posted is None:  # a link from a control's item page or a step preselects them
        built["reading"].control.data = request.args.get("control")
        built["reading"].step.data = request.args.get("step", type=int)
    return built


def _record(session: Session, report: controls.ControlsReport, kind: str,
            form: FlaskForm) -> str:
    actor = person_by_username(session, form.operator.data)
    if kind == "reading":
        indicator = next(i for i in report.indicators if i.code == form.indicator.data)
        step = session.get(Event, form.step.data) if form.step.data else None
        if form.step.data and step is None:
            raise InvalidInput("step", form.step.data, "the number of a recorded event")
        control_writes.record_control_reading(
            session, actor=actor, indicator=indicator,
            control=item_by_code(session, form.control.data),
            measured_at=form.measured_at.data, value=form.value.data,
            uncertainty=form.uncertainty.data, step=step, source=form.source.data or "")
        return f"Recorded a reading of {indicator.name} on {form.control.data}"
    upload = form.file.data
    text = f.upload_text(form.file)
    rows = control_writes.import_control_readings_csv(
        session, actor=actor, study=report.study, text=text,
        source=form.source.data or upload.filename or "")
    return f"Imported {len(rows)} control reading(s)"


@bp.post("/studies/<code>/controls/<kind>")
def record_reading(code: str, kind: str) -> Response | tuple[str, int]:
    """Record a control reading, or import a file of them, then show the controls again."""
    if kind not in ("reading", "import"):
        abort(404)
    session = db_session()
    report = controls.controls_report(session, code)
    forms = reading_forms(session, report, posted=kind)
    form = forms[kind]
    if not form.validate_on_submit():
        return _page(report, controls.DEFAULT_DEPTH, forms), 400
    try:
        said = _record(session, report, kind, form)
    except ImportRejected as exc:
        form.file.errors = [*exc.problems]
        return _page(report, controls.DEFAULT_DEPTH, forms), 400
    except CurationError as exc:
        f.attach_error(form, exc)
        return _page(report, controls.DEFAULT_DEPTH, forms), 400
    flash(said)
    return redirect(url_for("controls.controls_page", code=code))


@bp.get("/studies/<code>/controls")
def controls_page(code: str) -> str:
    """Each control's readings against its baseline, the failures and the items at risk."""
    depth = _depth()
    session = db_session()
    report = controls.controls_report(session, code, depth)
    return _page(report, depth, reading_forms(session, report))


@bp.get("/controls/<code>/reading")
def reading_for(code: str) -> Response:
    """Open the reading form of the study the control belongs to, control (and step) chosen."""
    session = db_session()
    control = item_by_code(session, code)
    study = session.scalar(select(Study.code).join(StudyItem, StudyItem.study_id == Study.id)
                           .where(StudyItem.item_id == control.id, StudyItem.role == "control")
                           .order_by(Study.code).limit(1))
    if study is None:
        raise InvalidInput("control", code, "a control enrolled in a study")
    return redirect(url_for("controls.controls_page", code=study, control=code,
                            step=request.args.get("step", type=int), _anchor="enter-h"))


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
