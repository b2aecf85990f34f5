"""The custody desk: scan an item, see who answers for it, record hand-overs, storage,
seals, shipments, inventory checks and handling; and the environment readings of a place.

Each write is form → validate → one service call → flash → redirect, so reloading the page
after a write shows it again instead of writing it twice.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from flask import Blueprint, abort, flash, redirect, render_template, request, url_for
from flask_wtf import FlaskForm
from sqlalchemy import select
from sqlalchemy.orm import Session, selectinload
from werkzeug.wrappers import Response

from curation.audit import custody as custody_rules
from curation.audit import engine
from curation.audit.findings import Finding
from curation.environment import TABLE_SIZES_UM
from curation.errors import CurationError, ImportRejected, InvalidInput
from curation.model import EnvironmentReading, Event, Item, Location, Person
from curation.services import custody, environment
from curation.services.common import item_by_code, location_by_code, person_by_username
from curation.web import forms as f
from curation.web.app import db_session
from curation.web.auth import may_write
from curation.web.items import placement_chain

bp = Blueprint("custody", __name__, url_prefix="/custody")

#: each desk form: (form class, title, the writer that turns it into one service call)
Writer = Callable[[Session, Item, Person, Any], Event]


def _person(session: Session, username: str | None) -> Person | None:
    return person_by_username(session, username) if username else None


def _place(session: Session, code: str | None) -> Location | None:
    return location_by_code(session, code) if code else None


def _release(s: Session, item: Item, actor: Person, form: f.ReleaseForm) -> Event:
    to = person_by_username(s, form.to.data)
    return custody.release(s, actor=actor, item=item, to=to, at=form.at.data,
                           location=_place(s, form.location.data), note=form.note.data or "")


def _receipt(s: Session, item: Item, actor: Person, form: f.ReceiptForm) -> Event:
    return custody.receive(s, actor=actor, item=item, giver=_person(s, form.giver.data),
                           at=form.at.data, location=_place(s, form.location.data),
                           condition=form.condition.data or "", note=form.note.data or "")


def _store(s: Session, item: Item, actor: Person, form: f.StoreForm) -> Event:
    return custody.store(s, actor=actor, item=item, location=location_by_code(
        s, form.location.data), at=form.at.data, slot=form.slot.data or "",
        note=form.note.data or "")


def _seal(s: Session, item: Item, actor: Person, form: f.SealForm) -> Event:
    return custody.seal(s, actor=actor, item=item, action=form.action.data,
                        seal_id=form.seal_id.data or "", at=form.at.data,
                        intact=form.intact.data != "no", location=_place(s, form.location.data),
                        note=form.note.data or "")


def _ship(s: Session, item: Item, actor: Person, form: f.ShipForm) -> Event:
    return custody.ship(s, actor=actor, item=item, at=form.at.data, carrier=form.carrier.data,
                        tracking_id=form.tracking_id.data or "",
                        to=_person(s, form.recipient.data),
                        location=_place(s, form.location.data), note=form.note.data or "")


def _deliver(s: Session, item: Item, actor: Person, form: f.DeliverForm) -> Event:
    return custody.deliver(s, actor=actor, item=item, at=form.at.data,
                           condition=form.condition.data, location=_place(s, form.location.data),
                           note=form.note.data or "")


def _inventory(s: Session, item: Item, actor: Person, form: f.InventoryForm) -> Event:
    return custody.check_inventory(s, actor=actor, item=item, location=location_by_code(
        s, form.location.data), at=form.at.data, found=form.found.data == "yes",
        note=form.note.data or "")


def _handling(s: Session, item: Item, actor: Person, form: f.HandlingForm) -> Event:
    return custody.handle(
        s, actor=actor, item=item, environment=form.environment.data, start=form.start.data,
        end=form.end.data, location=_place(s, form.location.data), o2_ppm=form.o2_ppm.data,
        h2o_ppm=form.h2o_ppm.data, iso_class=form.iso_class.data,
        contact_materials=form.contact_materials.data or [], tools=form.tool_list(),
        controls=form.control_list(), note=form.note.data or "")


DESK: dict[str, tuple[type[FlaskForm], str, Writer]] = {
    "release": (f.ReleaseForm, "Hand-over: release", _release),
    "receipt": (f.ReceiptForm, "Hand-over: receipt", _receipt),
    "store": (f.StoreForm, "Store", _store),
    "seal": (f.SealForm, "Seal", _seal),
    "ship": (f.ShipForm, "Ship", _ship),
    "deliver": (f.DeliverForm, "Delivery", _deliver),
    "inventory": (f.InventoryForm, "Inventory check", _inventory),
    "handling": (f.HandlingForm, "Handling", _handling),
}
#: service field names that a desk form calls something else
ALIASES = {"occurred_at": "at", "ended_at": "end"}


def desk_forms(session: Session, posted: str | None = None) -> dict[str, FlaskForm]:
    """Every desk form, choices filled; only the posted one reads the request."""
    people, places = f.operator_choices(session), f.location_choices(session)
    built = {}
    for name, (form_class, _, _) in DESK.items():
        form = form_class(prefix=name, **({} if name == posted else {"formdata": None}))
        for fld in form:
            if isinstance(fld, f.SelectField) and fld.short_name != "operator" \
                    and not fld.choices:
                fld.choices = places if fld.short_name == "location" else people
        form.operator.choices = people
        built[name] = form
    return built


# ---- the state of custody -------------------------------------------------------------


@dataclass
class CustodyView:
    """What the desk shows about one item's custody."""

    item: Item
    state: custody_rules.CustodyState
    custodian: Person | None
    chain: list[tuple[Event, list[Finding]]]
    containers: list[Item] = field(default_factory=list)


def custody_view(session: Session, item: Item) -> CustodyView:
    """The custody state after the last custody event, from the audit's own walk."""
    ctx = engine.context(session, item)
    state, chain = custody_rules.CustodyState(), []
    for event, state, found in custody_rules.walk(ctx):
        chain.append((event, found))
    holder = state.holder_event.actor if state.holder_event is not None else None
    ids, _ = placement_chain(session, item.id)
    by_id = {i.id: i for i in session.scalars(select(Item).where(Item.id.in_(ids)))}
    return CustodyView(item, state, holder, chain, [by_id[i] for i in ids if i in by_id])


def _desk(session: Session, item: Item, forms: dict[str, FlaskForm], status: int = 200
          ) -> tuple[str, int]:
    return render_template("custody/desk.html", v=custody_view(session, item), forms=forms,
                           desk=DESK), status


# ---- views ----------------------------------------------------------------------------


@bp.get("")
def scan() -> Response | tuple[str, int]:
    """The scan field: a scanner types the code and Enter; the desk for it opens."""
    code = request.args.get("code", "").replace("\x00", "").strip()[:64]
    if not code:
        return render_template("custody/scan.html", code="", error=""), 200
    if db_session().scalar(select(Item.id).where(Item.code == code)) is None:
        return render_template("custody/scan.html", code=code,
                               error=f"No item has the code {code!r}."), 404
    return redirect(url_for("custody.desk", code=code))


@bp.get("/<code>")
def desk(code: str) -> tuple[str, int]:
    """One item's custody now, its chain of custody and the forms to record the next step."""
    session = db_session()
    return _desk(session, item_by_code(session, code), desk_forms(session))


@bp.post("/<code>/<action>")
def record(code: str, action: str) -> Response | tuple[str, int]:
    """Record one custody or handling event from its form, then show the desk again."""
    if action not in DESK:
        abort(404)
    session = db_session()
    item = item_by_code(session, code)
    may_write([item])
    forms = desk_forms(session, posted=action)
    form = forms[action]
    if not form.validate_on_submit():
        return _desk(session, item, forms, 400)
    try:
        event = DESK[action][2](session, item, person_by_username(session, form.operator.data),
                                form)
    except CurationError as exc:
        f.attach_error(form, exc, ALIASES | ({"occurred_at": "start"}
                                             if action == "handling" else {}))
        return _desk(session, item, forms, 400)
    flash(f"Recorded event #{event.id} on {item.code}: {event.summary or event.action}")
    return redirect(url_for("custody.desk", code=code, _anchor="now"))


# ---- environment readings -------------------------------------------------------------

#: how many of a place's latest readings the environment page lists
LATEST = 20

ENVIRONMENT: dict[str, tuple[type[FlaskForm], str]] = {
    "counts": (f.CountsForm, "Particle counts → ISO 14644-1 class"),
    "atmosphere": (f.AtmosphereForm, "Glovebox atmosphere"),
    "log": (f.AtmosphereFileForm, "Glovebox log (CSV import)"),
    "climate": (f.ClimateForm, "Storage climate"),
}


def environment_forms(session: Session, posted: str | None = None) -> dict[str, FlaskForm]:
    """Every reading form, operators filled in; only the posted one reads the request."""
    people = f.operator_choices(session)
    built = {}
    for name, (form_class, _) in ENVIRONMENT.items():
        form = form_class(prefix=name, **({} if name == posted else {"formdata": None}))
        form.operator.choices = people
        built[name] = form
    return built


def _write_counts(s: Session, place: Location, actor: Person, form: f.CountsForm) -> str:
    counts = form.counts()
    if not counts:
        raise InvalidInput("counts", "", "a count in at least one size channel")
    reading = environment.record_particle_counts(
        s, actor=actor, location=place, measured_at=form.measured_at.data,
        counts_per_m3=counts, counter=form.counter.data or "")
    return (f"ISO class {reading.iso_class:g} for {place.name}, decided by the "
            f"≥ {reading.details['deciding_size_um']:g} µm channel")


def _write_atmosphere(s: Session, place: Location, actor: Person, form: f.AtmosphereForm
                      ) -> str:
    environment.record_atmosphere(s, actor=actor, location=place,
                                  measured_at=form.measured_at.data, o2_ppm=form.o2_ppm.data,
                                  h2o_ppm=form.h2o_ppm.data)
    return f"Atmosphere of {place.name} recorded"


def _write_log(s: Session, place: Location, actor: Person, form: f.AtmosphereFileForm) -> str:
    upload = form.file.data
    text = f.upload_text(form.file)
    rows = environment.import_atmosphere_csv(s, actor=actor, location=place, text=text,
                                             source=form.source.data or upload.filename or "")
    return f"Imported {len(rows)} atmosphere reading(s) for {place.name}"


def _write_climate(s: Session, place: Location, actor: Person, form: f.ClimateForm) -> str:
    environment.record_climate(s, actor=actor, location=place,
                               measured_at=form.measured_at.data,
                               temperature_C=form.temperature_C.data,
                               humidity_pct=form.humidity_pct.data)
    return f"Climate of {place.name} recorded"


READERS: dict[str, Callable[..., str]] = {
    "counts": _write_counts, "atmosphere": _write_atmosphere, "log": _write_log,
    "climate": _write_climate,
}


def latest_readings(session: Session, place: Location) -> list[EnvironmentReading]:
    """The place's latest readings, newest first."""
    return list(session.scalars(
        select(EnvironmentReading).where(EnvironmentReading.location_id == place.id)
        .options(selectinload(EnvironmentReading.actor))
        .order_by(EnvironmentReading.measured_at.desc(), EnvironmentReading.id.desc())
        .limit(LATEST)))


def _environment(session: Session, place: Location | None, forms: dict[str, FlaskForm],
                 status: int = 200) -> tuple[str, int]:
    return render_template(
        "custody/environment.html", place=place, forms=forms, titles=ENVIRONMENT,
        places=session.execute(select(Location.code, Location.name).order_by(Location.code)),
        readings=latest_readings(session, place) if place else [],
        sizes=TABLE_SIZES_UM), status


@bp.get("/environment")
def environment_page() -> Response | tuple[str, int]:
    """Pick a place; its reading forms and latest readings open."""
    code = request.args.get("location", "").strip()
    if code:
        return redirect(url_for("custody.environment_place", code=code))
    session = db_session()
    return _environment(session, None, {})


@bp.get("/environment/<code>")
def environment_place(code: str) -> tuple[str, int]:
    """One place's reading forms and latest readings."""
    session = db_session()
    return _environment(session, location_by_code(session, code), environment_forms(session))


@bp.post("/environment/<code>/<kind>")
def record_reading(code: str, kind: str) -> Response | tuple[str, int]:
    """Record a reading (or import a log) for the place, then show its readings."""
    if kind not in READERS:
        abort(404)
    session = db_session()
    place = location_by_code(session, code)
    forms = environment_forms(session, posted=kind)
    form = forms[kind]
    if not form.validate_on_submit():
        return _environment(session, place, forms, 400)
    try:
        said = READERS[kind](session, place, person_by_username(session, form.operator.data),
                             form)
    except ImportRejected as exc:
        form.file.errors = [*exc.problems]
        return _environment(session, place, forms, 400)
    except CurationError as exc:
        # Counts that no class admits belong to the whole form, not one channel.
        f.attach_error(form, exc)
        return _environment(session, place, forms, 400)
    flash(said)
    return redirect(url_for("custody.environment_place", code=code, _anchor="readings"))
