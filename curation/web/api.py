"""The JSON API for instrument-side scripts, under /api/v1 (OpenAPI: /api/v1/openapi.json).

A script presents its station's token (`Authorization: Bearer <token>`); the API takes no
form token (CSRF) because browsers never send that header on their own. Refusals come back
as {"errors": {"field": ["message", ...]}} with the same messages the forms show.
"""

from __future__ import annotations

from datetime import datetime
from typing import Any

from flask import Blueprint, Response, g, jsonify, request
from sqlalchemy import select
from sqlalchemy.orm import Session
from werkzeug.exceptions import HTTPException

from curation import history, techniques
from curation.errors import CurationError, InvalidInput, NotFound, RuleViolation
from curation.ledger import plain
from curation.model import DataFile, Event, Item, Person, Station
from curation.services import files, images, steps, tokens
from curation.services.common import item_by_code, person_by_username
from curation.techniques import RangeWarning, ValidationFailed
from curation.web import forms as f
from curation.web import openapi
from curation.web.app import db_session

bp = Blueprint("api", __name__, url_prefix="/api/v1")

PUBLIC = {"api.openapi_document"}


def failure(status: int, errors: dict[str, list[str]], **extra: Any) -> tuple[Response, int]:
    """A JSON refusal."""
    return jsonify({"errors": errors, **extra}), status


@bp.before_request
def _authenticate() -> tuple[Response, int] | None:
    if request.endpoint in PUBLIC:
        return None
    scheme, _, token = request.headers.get("Authorization", "").partition(" ")
    station = tokens.station_for(db_session(), token.strip()) if scheme.lower() == "bearer" \
        and token.strip() else None
    if station is None:
        said = ("a live station token: send 'Authorization: Bearer <token>' "
                "(make one with `curation token add STATION`)")
        answer, status = failure(401, {"authorization": [said]})
        answer.headers["WWW-Authenticate"] = 'Bearer realm="curation"'
        return answer, status
    g.api_station = station
    return None


def _station() -> Station:
    station: Station = g.api_station
    return station


# ---- errors -----------------------------------------------------------------------------


def invalid(exc: InvalidInput) -> dict[str, list[str]]:
    """A refusal's messages by field: every problem of a ValidationFailed apart."""
    problems = exc.problems if isinstance(exc, ValidationFailed) else (exc,)
    shown: dict[str, list[str]] = {}
    for p in problems:
        shown.setdefault(p.field, []).append(str(p))
    return shown


@bp.errorhandler(CurationError)
def _refused(exc: CurationError) -> tuple[Response, int]:
    if isinstance(exc, steps.WarningsNeedConfirmation):
        return failure(409, {w.field: [w.message] for w in exc.warnings},
                       warnings=[warning_json(w) for w in exc.warnings])
    if isinstance(exc, InvalidInput):
        return failure(400, invalid(exc))
    if isinstance(exc, NotFound):
        return failure(404, {"request": [str(exc)]})
    return failure(409 if isinstance(exc, RuleViolation) else 400, {"request": [str(exc)]})


@bp.errorhandler(HTTPException)
def _http_error(exc: HTTPException) -> tuple[Response, int]:
    return failure(exc.code or 500, {"request": [exc.description or exc.name]})


def warning_json(w: RangeWarning) -> dict[str, Any]:
    """A typical-range warning as JSON."""
    return {"field": w.field, "value": w.value, "typical": w.typical, "unit": w.unit,
            "message": w.message}


# ---- reading the request ----------------------------------------------------------------


def _body(props: dict[str, openapi.Prop]) -> dict[str, Any]:
    body = request.get_json(silent=True)
    errors = openapi.check(body, props)
    if errors:
        raise BodyRefused(errors)
    return dict(body or {})


class BodyRefused(InvalidInput):
    """A body that breaks the API's description, with every problem by field."""

    def __init__(self, errors: dict[str, list[str]]) -> None:
        self.errors = errors
        super().__init__(", ".join(errors), None, "see errors")


@bp.errorhandler(BodyRefused)
def _body_refused(exc: BodyRefused) -> tuple[Response, int]:
    return failure(400, exc.errors)


def _moment(body: dict[str, Any], name: str) -> datetime | None:
    text = body.get(name)
    if text is None:
        return None
    try:
        return f.parse_moment(text, "")
    except ValueError as exc:
        raise InvalidInput(name, text, str(exc)) from None


def _referenced(field: str, find: Any, *args: Any) -> Any:
    """A row named in the body; an unknown name is a refusal of that field, not a 404."""
    try:
        return find(*args)
    except NotFound as exc:
        raise InvalidInput(field, args[-1], str(exc)) from None


def _path_item(session: Session, code: str) -> Item:
    if "\x00" in code:
        raise NotFound(f"no item with code {code!r}")
    return item_by_code(session, code)


# ---- JSON of rows -----------------------------------------------------------------------


def item_json(item: Item) -> dict[str, Any]:
    """An item's own fields."""
    names = ("code", "kind", "material", "status", "description", "is_pristine", "mass_ug",
             "mass_uncertainty_ug", "mass_method", "volume_um3", "volume_uncertainty_um3",
             "volume_method", "created_at", "recorded_at")
    return {n: plain(getattr(item, n)) for n in names}


def event_json(event: Event) -> dict[str, Any]:
    """An event's fields, people and places by their codes."""
    names = ("id", "kind", "occurred_at", "ended_at", "recorded_at", "technique", "action",
             "environment", "is_destructive", "summary", "details", "note", "supersedes_id",
             "submission_key", "electron_dose_e_per_A2", "dose_rate_e_per_A2_s",
             "ion_fluence_ions_per_cm2", "xray_s", "is_dose_reported")
    out = {n: plain(getattr(event, n)) for n in names}
    out.update(item=event.item.code, actor=event.actor.username,
               station=event.station.code if event.station else None,
               location=event.location.code if event.location else None)
    return out


def file_json(data_file: DataFile, image: Any = None) -> dict[str, Any]:
    """A data file's record (and its image facts when it is one)."""
    names = ("id", "path", "original_name", "size_bytes", "sha256", "modified_at", "technique",
             "media_type", "is_upload", "event_id", "registered_at")
    out = {n: plain(getattr(data_file, n)) for n in names}
    if image is not None:
        out["image"] = {n: getattr(image, n) for n in (
            "width_px", "height_px", "bit_depth", "mode", "pixel_size_nm", "pixel_size_source")}
    return out


# ---- endpoints --------------------------------------------------------------------------


@bp.get("/openapi.json")
def openapi_document() -> Response:
    """The OpenAPI 3 document of this API."""
    return jsonify(openapi.document())


@bp.get("/items/<code>")
def get_item(code: str) -> Response:
    """An item, its effective history and its data files."""
    session = db_session()
    item = _path_item(session, code)
    entries = history.effective_history(session, item.id)
    codes = dict(session.execute(select(Item.id, Item.code).where(
        Item.id.in_(sorted({i for e in entries for i in e.path})))).all())
    return jsonify({
        "item": item_json(item),
        "history": [event_json(e.event) | {"reach": e.reach,
                                           "path": [codes[i] for i in e.path]}
                    for e in entries],
        "files": [file_json(df, im) for df, im in images.files_with_images(session, item.id)],
    })


@bp.post("/items/<code>/files")
def post_file(code: str) -> tuple[Response, int]:
    """Register a data file by its path for the token's station."""
    session = db_session()
    item = _path_item(session, code)
    body = _body(openapi.DATA_FILE)
    actor: Person = _referenced("operator", person_by_username, session, body["operator"])
    step = session.get(Event, body["step_id"]) if body.get("step_id") is not None else None
    if body.get("step_id") is not None and step is None:
        raise InvalidInput("step_id", body["step_id"], "the id of a step recorded on " + code)
    before = session.scalar(select(DataFile.id).order_by(DataFile.id.desc()).limit(1))
    # Through the API only the configured data folders are open: a token must not be able
    # to make the server read any file it can see.
    roots = files.data_roots()
    if not roots:
        raise InvalidInput("path", body["path"], "registration by path through the API needs "
                           f"{files.ROOTS_ENV} set on the server")
    kept = files.register_path(session, actor=actor, item=item, path=body["path"],
                               technique=body.get("technique"), step=step, roots=roots)
    return jsonify(file_json(kept)), 201 if before is None or kept.id > before else 200


@bp.get("/techniques/<code>")
def get_technique(code: str) -> Response:
    """A technique's parameter spec."""
    try:
        spec = techniques.get(code)
    except InvalidInput as exc:
        raise NotFound(str(exc)) from None
    return jsonify(technique_json(spec))


def technique_json(spec: techniques.Technique) -> dict[str, Any]:
    """A technique's spec: fields with unit, hard and typical range, choices."""
    def field_json(fld: techniques.Field) -> dict[str, Any]:
        return {"name": fld.name, "label": fld.label, "kind": fld.kind, "unit": fld.unit,
                "unit_symbol": fld.unit_symbol, "required": fld.required,
                "required_when": list(fld.required_when) if fld.required_when else None,
                "hard_range": fld.hard.describe(fld.unit),
                "typical_range": fld.typical.describe(fld.unit) if fld.typical else None,
                "choices": list(fld.choices), "default": fld.default, "help": fld.help}

    return {"code": spec.code, "family": spec.family, "label": spec.label,
            "is_destructive": spec.is_destructive, "creates": list(spec.creates),
            "puts_electron_beam": spec.puts_electron_beam, "puts_ion_beam": spec.puts_ion_beam,
            "puts_xrays": spec.puts_xrays, "help": spec.help,
            "fields": [field_json(fld) for fld in spec.fields]}


def _children(session: Session, body: dict[str, Any]) -> steps.Children | None:
    asked = body.get("children")
    if asked is None:
        return None
    coupon = _referenced("coupon", item_by_code, session, asked["coupon"]) \
        if asked.get("coupon") else None
    return steps.Children(kind=asked.get("kind") or None, count=asked.get("count"),
                          coupon=coupon, first_post=asked.get("first_post") or 1)


@bp.post("/steps")
def post_step() -> tuple[Response, int]:
    """Log one instrument session at the token's station, as the station page does."""
    session = db_session()
    body = _body(openapi.STEP)
    occurred_at, ended_at = _moment(body, "occurred_at"), _moment(body, "ended_at")
    assert occurred_at is not None  # required by the description
    actor: Person = _referenced("operator", person_by_username, session, body["operator"])
    covered = [_referenced("items", item_by_code, session, c) for c in body["items"]]
    result = steps.record_step(
        session, actor=actor, station=_station(), technique=body["technique"], items=covered,
        occurred_at=occurred_at, ended_at=ended_at, raw_params=body["params"],
        confirm_warnings=bool(body.get("confirm_warnings")),
        submission_key=body.get("submission_key"), children=_children(session, body),
        summary=body.get("summary") or "", note=body.get("note") or "")
    return jsonify({
        "events": [event_json(e) for e in result.events],
        "children": [c.code for c in result.children],
        "warnings": [w.message for w in result.warnings],
        "is_repeat": result.is_repeat, "submission_key": result.submission_key,
    }), 200 if result.is_repeat else 201
