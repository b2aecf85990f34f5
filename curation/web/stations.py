"""The station page: the instrument PC's scan field, the technique's form built from its spec,
and the record of what the last step wrote.

State between scans lives in the URL (`?item=CODE&item=CODE&technique=...`), so the page
needs no script and a reload shows the same session. A step is form → validate → one
service call → commit → redirect to `?done=<submission key>`, which shows what was written.
"""

from __future__ import annotations

import uuid
from dataclasses import dataclass, field
from typing import Any

from flask import Blueprint, flash, redirect, render_template, request, url_for
from flask_wtf import FlaskForm
from sqlalchemy import select
from sqlalchemy.orm import Session, joinedload
from werkzeug.datastructures import MultiDict
from werkzeug.wrappers import Response
from wtforms import BooleanField, HiddenField, IntegerField, SelectField, StringField
from wtforms.validators import InputRequired, Length, NumberRange, Optional

from curation.errors import CurationError, InvalidInput
from curation.model import Instrument, Item, Placement, Station
from curation.services import steps
from curation.services.common import person_by_username, station_by_code
from curation.techniques import RangeWarning, Technique, ValidationFailed
from curation.techniques.spec import Field as Spec
from curation.web import forms as f
from curation.web.app import db_session
from curation.web.auth import may_write

bp = Blueprint("stations", __name__, url_prefix="/stations")

#: prefix of a parameter's form field: the spec's names may clash with the form's own
PARAM = "p_"
#: most items one session covers (a full coupon holds a few dozen needles)
MAX_ITEMS = 100


_SUPERSCRIPT = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")


@bp.app_template_filter("sci")
def sci(value: float | None) -> str:
    """A dose as people write it: 62.4, 0.0012, 14 406 or 1.2 × 10¹⁶."""
    if value is None:
        return "—"
    if value == 0 or 1e-3 <= abs(value) < 1e3:
        return f"{value:.3g}"
    if 1e3 <= abs(value) < 1e6:
        return f"{round(value):,}".replace(",", " ")
    mantissa, exponent = f"{value:.2e}".split("e")
    return f"{float(mantissa):g} × 10{str(int(exponent)).translate(_SUPERSCRIPT)}"


# ---- the form, built from a technique's spec -------------------------------------------


class StepFormBase(FlaskForm):
    """What every step form holds besides the technique's parameters."""

    technique = HiddenField()
    items = HiddenField()
    submission_key = HiddenField(validators=[Length(max=64)])
    operator = f.operator_field()
    started = f.MomentField("Session start", validators=[InputRequired(
                                message="required: enter or choose a value")],
                            description="The instrument's clock, with its UTC offset.")
    ended = f.MomentField("Session end", default=None, validators=[Optional()],
                          description="Empty for an instant; new items are cut at the end.")
    summary = StringField("Summary", validators=[Optional(), Length(max=300)],
                          description="Left empty: the technique and the items it made.")
    note = f.note_field()
    confirm = BooleanField("I have checked the values marked above: confirm and record")
    #: the technique the form was built from (set on each generated class)
    spec: Technique

    def param_fields(self) -> list[tuple[Any, Spec]]:
        """The technique's parameter fields with their specs, in catalogue order."""
        return [(self[PARAM + s.name], s) for s in self.spec.fields]

    def raw_params(self) -> dict[str, object]:
        """The parameters as typed (text with optional units), blanks left out."""
        return {s.name: fld.data for fld, s in self.param_fields()
                if fld.data not in (None, "")}


def hint(spec: Spec) -> str:
    """Typical range and help beside a field: '0.5–30 kV typical. Accepts other units...'."""
    words = [f"Typical {spec.typical.describe(spec.unit)}."] if spec.typical else []
    if spec.required_when:
        other, wanted = spec.required_when
        words.append(f"Required when {other} is {' or '.join(wanted)}.")
    return " ".join([*words, spec.help]).strip()


def param_field(spec: Spec) -> Any:
    """One WTForms field for a parameter: a select for choices and flags, else text."""
    if spec.kind in ("choice", "bool"):
        options = spec.choices if spec.kind == "choice" else ("yes", "no")
        blank = "— choose —" if spec.required else "— not given —"
        return SelectField(spec.label, choices=[f.choice("", blank), *map(f.choice, options)],
                           description=hint(spec), validators=[Optional()])
    # Text, not a number field: '500 pA' or '1024 x 768' are converted by the catalogue.
    return StringField(spec.label, description=hint(spec), validators=[Optional(),
                                                                      Length(max=500)])


def children_fields() -> dict[str, Any]:
    """Where the items a destructive step makes are placed."""
    return {
        "coupon": StringField("Coupon or grid code", validators=[Optional(), Length(max=64)],
                              description="Scan the holder the new items stand on "
                                          "(needles: required)."),
        "first_post": IntegerField("First post", default=1,
                                   validators=[Optional(), NumberRange(min=1, max=999)],
                                   description="Numbered posts from here on, one per new item."),
    }


_FORMS: dict[str, type[StepFormBase]] = {}


def step_form_class(technique: Technique) -> type[StepFormBase]:
    """The form class of a technique, built once from its spec."""
    if technique.code not in _FORMS:
        attrs: dict[str, Any] = {PARAM + s.name: param_field(s) for s in technique.fields}
        attrs["spec"] = technique
        if technique.creates:
            attrs.update(children_fields())
        name = "StepForm_" + technique.code.replace("-", "_")
        _FORMS[technique.code] = type(name, (StepFormBase,), attrs)
    return _FORMS[technique.code]


# ---- reading the page's state ----------------------------------------------------------


def _code(text: str | None) -> str:
    """A scanned code: NUL dropped (PostgreSQL refuses it), trimmed, at most 64 characters."""
    return (text or "").replace("\x00", "").strip()[:64]


@dataclass
class Desk:
    """One station page: the station, the items of the session, the chosen technique."""

    station: Station
    allowed: list[Technique]
    items: list[Item] = field(default_factory=list)
    technique: Technique | None = None
    scan: str = ""
    scan_error: str = ""
    technique_error: str = ""
    #: a scanned holder and what sits on it now, as (item, position)
    offer: tuple[Item, list[tuple[Item, str]]] | None = None
    done: steps.StepResult | None = None
    positions: dict[int, str] = field(default_factory=dict)


def items_by_code(session: Session, codes: list[str]) -> tuple[list[Item], list[str]]:
    """The items with these codes in the given order, and the codes that name nothing."""
    found = {i.code: i for i in session.scalars(select(Item).where(Item.code.in_(codes)))}
    return [found[c] for c in codes if c in found], [c for c in codes if c not in found]


def on_holder(session: Session, holder: Item) -> list[tuple[Item, str]]:
    """What sits on a coupon, grid or mount now, with its position, post by post."""
    rows = session.execute(
        select(Item, Placement.position).join(Placement, Placement.item_id == Item.id)
        .where(Placement.container_id == holder.id, Placement.removed_at.is_(None))
        .order_by(Placement.position, Item.code))
    return [(item, position) for item, position in rows]


def desk_from_args(session: Session, station: Station, args: MultiDict[str, Any]) -> Desk:
    """The page's state from its query string: items, a fresh scan, the technique."""
    desk = Desk(station, steps.station_techniques(station))
    codes = list(dict.fromkeys(_code(c) for c in args.getlist("item") if _code(c)))
    desk.items, unknown = items_by_code(session, codes[:MAX_ITEMS])
    if unknown:
        desk.scan_error = "No item has the code " + ", ".join(map(repr, unknown)) + "."
    desk.scan = _code(args.get("scan"))
    if desk.scan:
        _take_scan(session, desk)
    _choose_technique(desk, args.get("technique", ""))
    return desk


def _take_scan(session: Session, desk: Desk) -> None:
    """Add the scanned item; a holder with items on it offers them instead."""
    found, _ = items_by_code(session, [desk.scan])
    if not found:
        desk.scan_error = f"No item has the code {desk.scan!r}."
        return
    held = on_holder(session, found[0])
    if held:
        desk.offer = (found[0], held)
        return
    if found[0] not in desk.items:  # a label scanned twice counts once
        desk.items.append(found[0])
    desk.scan = ""


def _choose_technique(desk: Desk, code: str) -> None:
    """The technique asked for if the station runs it, else the instrument's first."""
    code = code.strip()
    if code:
        try:
            desk.technique = steps.check_technique(desk.station, code)
            return
        except InvalidInput as exc:
            desk.technique_error = exc.allowed if exc.field == "technique" else str(exc)
    desk.technique = desk.allowed[0] if desk.allowed and not code else None


def new_form(session: Session, desk: Desk, formdata: Any = None) -> StepFormBase | None:
    """The step form of the chosen technique, carrying the session's items and a fresh key."""
    if desk.technique is None:
        return None
    form_class = step_form_class(desk.technique)
    if formdata is not None:
        form = form_class(formdata=formdata)
    else:
        form = form_class(formdata=None, technique=desk.technique.code,
                          items=" ".join(i.code for i in desk.items),
                          submission_key=uuid.uuid4().hex)
    form.operator.choices = f.operator_choices(session)
    return form


def cautions(technique: Technique | None) -> list[str]:
    """The hazards of a technique's work, in the trade's usual words."""
    if technique is None:
        return []
    said = []
    if technique.puts_electron_beam or technique.puts_ion_beam:
        said.append("Beam work under high voltage and vacuum: keep the chamber and column "
                    "interlocks on; vent and pump only as the instrument's procedure says.")
    if technique.puts_xrays:
        said.append("X-ray source: never defeat the enclosure interlocks.")
    if technique.family in ("fib", "apt") or "needle" in technique.creates:
        said.append("Micromanipulator tips and FIB-made needles are sharp and break easily: "
                    "move coupons covered, with tweezers.")
    if technique.family == "apt" or technique.code == "heating":
        said.append("Cryogenic stages and hot stages burn: let them reach room temperature "
                    "before handling.")
    return said


# ---- views ----------------------------------------------------------------------------


@bp.get("")
def station_list() -> str:
    """Every station with its instrument and place."""
    stations = db_session().scalars(
        select(Station).options(joinedload(Station.instrument).joinedload(Instrument.location),
                                joinedload(Station.location)).order_by(Station.code)).all()
    return render_template("stations/list.html", stations=stations,
                           runs={s.id: steps.station_techniques(s) for s in stations})


def _render(session: Session, desk: Desk, form: StepFormBase | None,
            warnings: tuple[RangeWarning, ...] = (), status: int = 200) -> tuple[str, int]:
    # The first field to fix takes the focus; else the scan field has it.
    first = next((fld for fld in form if fld.errors), None) if form is not None else None
    if first is not None:
        first.render_kw = {**(first.render_kw or {}), "autofocus": True}
    focus = first.name if first is not None else None
    return render_template("stations/station.html", d=desk, form=form, warnings=warnings,
                           warned={w.field for w in warnings}, cautions=cautions(desk.technique),
                           focus=focus, letters=steps.CODE_LETTERS), status


@bp.get("/<code>")
def station_page(code: str) -> Response | tuple[str, int]:
    """The scan field, the items of this session, the technique's form, the last record."""
    session = db_session()
    desk = desk_from_args(session, station_by_code(session, code), request.args)
    if _code(request.args.get("scan")) and not (desk.scan or desk.scan_error):
        # The scan was taken: show the session at an address a reload does not re-scan.
        return redirect(url_for("stations.station_page", code=desk.station.code,
                                item=[i.code for i in desk.items],
                                technique=desk.technique.code if desk.technique else None))
    done = _code(request.args.get("done"))
    if done:
        desk.done = steps.written(session, done)
        desk.positions = _positions(session, desk.done)
    status = 404 if desk.scan_error else 400 if desk.technique_error else 200
    return _render(session, desk, new_form(session, desk), status=status)


def _positions(session: Session, result: steps.StepResult | None) -> dict[int, str]:
    """Where each item a step made stands now: 'post-03 of VPL-CPN-12'."""
    if result is None or not result.children:
        return {}
    rows = session.execute(
        select(Placement.item_id, Placement.position, Item.code)
        .join(Item, Item.id == Placement.container_id)
        .where(Placement.item_id.in_([c.id for c in result.children]),
               Placement.removed_at.is_(None)))
    return {r.item_id: f"{r.position} of {r.code}".strip() for r in rows}


def _children(session: Session, form: StepFormBase) -> steps.Children | None:
    """What the step makes, when its technique makes items; the holder found by its code."""
    if "coupon" not in form:
        return None
    holder_code = _code(form["coupon"].data)
    holder = None
    if holder_code:
        found, _ = items_by_code(session, [holder_code])
        if not found:
            raise InvalidInput("coupon", holder_code, "the code of a coupon or grid; "
                               "no item has this code")
        holder = found[0]
    return steps.Children(coupon=holder, first_post=form["first_post"].data or 1)


def _record(session: Session, desk: Desk, form: StepFormBase) -> steps.StepResult:
    """The one service call of a posted step."""
    assert desk.technique is not None
    may_write(desk.items, desk.station)
    return steps.record_step(
        session, actor=person_by_username(session, form.operator.data),
        station=desk.station, technique=desk.technique.code, items=desk.items,
        occurred_at=form.started.data, ended_at=form.ended.data, raw_params=form.raw_params(),
        confirm_warnings=bool(form.confirm.data),
        submission_key=form.submission_key.data or None,
        children=_children(session, form), summary=form.summary.data or "",
        note=form.note.data or "")


def show_problems(form: StepFormBase, exc: CurationError) -> None:
    """Each refusal beside the field it names: the value and what is allowed."""
    problems = exc.problems if isinstance(exc, ValidationFailed) else (exc,)
    aliases = {"occurred_at": "started", "ended_at": "ended", "child_kind": PARAM + "child_kind"}
    for problem in problems:
        name = problem.field if isinstance(problem, InvalidInput) else ""
        target = form._fields.get(PARAM + name) or form._fields.get(aliases.get(name, name))
        if target is None or not isinstance(problem, InvalidInput):
            f.attach_error(form, problem)
        elif problem.value is None:
            target.errors = [*target.errors, problem.allowed]
        else:
            said = f"{problem.value!r} is not allowed ({problem.allowed})"
            target.errors = [*target.errors, said]


@bp.post("/<code>/record")
def record(code: str) -> Response | tuple[str, int]:
    """Record one step over the session's items, then show what was written.

    No #fragment on the way back: a page opened at a fragment skips autofocus, and the scan
    field must have the focus for the next item."""
    session = db_session()
    station = station_by_code(session, code)
    args = MultiDict([("item", c) for c in request.form.get("items", "").split()])
    args.add("technique", request.form.get("technique", ""))
    desk = desk_from_args(session, station, args)
    form = new_form(session, desk, request.form)
    if form is None or desk.scan_error:
        return _render(session, desk, new_form(session, desk), status=400)
    if not form.validate_on_submit():
        return _render(session, desk, form, status=400)
    try:
        result = _record(session, desk, form)
    except steps.WarningsNeedConfirmation as exc:
        # A question, not a refusal: nothing is written until the box is ticked.
        return _render(session, desk, form, exc.warnings)
    except CurationError as exc:
        show_problems(form, exc)
        return _render(session, desk, form, status=400)
    flash(_said(result))
    return redirect(url_for("stations.station_page", code=station.code,
                            technique=desk.technique.code if desk.technique else None,
                            done=result.submission_key))


def _said(result: steps.StepResult) -> str:
    """The flash after a step: how many events, and the new codes."""
    if result.is_repeat:
        return "Already recorded: this submission was sent twice; nothing new was written."
    made = f"; made {', '.join(c.code for c in result.children)}" if result.children else ""
    return f"Recorded {len(result.events)} step event(s){made}."
