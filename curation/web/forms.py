"""Every form of the web layer: fields and their checks only (services check the rules).

Choices that come from the database (people, locations) are filled in by the view; no
validator here queries anything.
"""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime, timedelta, timezone
from typing import Any

from flask import g
from flask_wtf import FlaskForm
from flask_wtf.file import FileField, FileRequired
from markupsafe import Markup, escape
from sqlalchemy import select
from sqlalchemy.orm import Session
from wtforms import (
    Field,
    FloatField,
    Form,
    IntegerField,
    RadioField,
    SelectField,
    SelectMultipleField,
    StringField,
    TextAreaField,
)
from wtforms.utils import unset_value
from wtforms.validators import InputRequired, Length, NumberRange, Optional, ValidationError
from wtforms.widgets import CheckboxInput, ListWidget

from curation.audit.engine import CODES
from curation.audit.findings import ERROR, WARNING
from curation.environment import TABLE_SIZES_UM
from curation.errors import CurationError, InvalidInput
from curation.model import Decision, Location, Person
from curation.services.custody import CONTACT_MATERIALS, Environment

try:
    from wtforms import SelectChoice
except ImportError:  # WTForms before 3.3 takes (value, label) pairs
    SelectChoice = None  # type: ignore[assignment,misc]


def choice(value: str, label: str | None = None) -> Any:
    """One option of a select, radio or checkbox list, in the form this WTForms wants."""
    label = value if label is None else label
    return SelectChoice(value, label) if SelectChoice is not None else (value, label)


def choices(pairs: Any) -> list[Any]:
    """Options from (value, label) pairs."""
    return [choice(v, label) for v, label in pairs]


#: a blank first choice, so nobody is attributed by accident
NOBODY = choice("", "— choose —")


#: roles that may record only as themselves
SELF_ONLY = ("analyst", "station")


def operator_choices(session: Session) -> list[tuple[str, str]]:
    """Active people as (username, "name (username)"): the logged-in person first (chosen by
    default), then a blank and everyone else; analysts and stations only themselves."""
    user: Person | None = g.get("user")
    if user is not None and user.role in SELF_ONLY:
        return [choice(user.username, f"{user.name} ({user.username})")]
    people = session.execute(select(Person.username, Person.name).where(Person.is_active)
                             .order_by(Person.name, Person.username)).all()
    me = user.username if user is not None else None
    mine = [choice(u, f"{n} ({u})") for u, n in people if u == me]
    return [*mine, NOBODY, *(choice(u, f"{n} ({u})") for u, n in people if u != me)]


def location_choices(session: Session) -> list[tuple[str, str]]:
    """Locations as (code, "name (code)"), after a blank first choice."""
    places = session.execute(select(Location.code, Location.name).order_by(Location.code))
    return [choice("", "— none given —"), *(choice(c, f"{n} ({c})") for c, n in places)]


def upload_text(field: Any) -> str:
    """The uploaded file of a FileField as text, or an error naming the field."""
    upload = field.data
    try:
        return upload.read().decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InvalidInput(field.short_name, upload.filename, "a UTF-8 text (CSV) file") from None


def attach_error(form: Form, exc: CurationError, aliases: dict[str, str] | None = None) -> None:
    """Show a service's refusal beside the field it names, else at the top of the form."""
    name = exc.field if isinstance(exc, InvalidInput) else ""
    name = (aliases or {}).get(name, name)
    target = form._fields.get(name) if name else None
    if target is not None:
        target.errors = [*target.errors, str(exc)]
    else:
        form.form_errors.append(str(exc))


# ---- timestamps -----------------------------------------------------------------------


def _offset_text(offset: timedelta) -> str:
    minutes = int(offset.total_seconds() // 60)
    sign = "+" if minutes >= 0 else "-"
    return f"{sign}{abs(minutes) // 60:02d}:{abs(minutes) % 60:02d}"


def server_offset() -> str:
    """The server's current UTC offset as ±HH:MM (changes with daylight saving)."""
    return _offset_text(datetime.now().astimezone().utcoffset() or timedelta(0))


def _minutes(offset: str) -> int:
    return (-1 if offset.startswith("-") else 1) * (int(offset[1:3]) * 60 + int(offset[4:6]))


def offset_choices() -> list[str]:
    """Every offset in use: half-hour steps from -12:00 to +14:00, and the three :45 ones."""
    steps = {_offset_text(timedelta(minutes=30 * n)) for n in range(-24, 29)}
    steps |= {"+05:45", "+08:45", "+12:45", server_offset()}
    return sorted(steps, key=_minutes)


def parse_moment(text: str, offset: str) -> datetime:
    """An aware datetime from a local date-time and an offset, or an ISO 8601 with its own."""
    try:
        value = datetime.fromisoformat(text.strip())
    except ValueError:
        raise ValueError(f"{text!r} is not a date and time (YYYY-MM-DDTHH:MM)") from None
    if value.tzinfo is not None:
        return value
    if not offset:
        raise ValueError(f"{text!r} has no UTC offset, so it names no single instant; "
                         "choose the offset of the clock you read")
    try:
        hours, minutes = int(offset[1:3]), int(offset[4:6])
    except ValueError:
        raise ValueError(f"UTC offset {offset!r} is not ±HH:MM") from None
    sign = -1 if offset.startswith("-") else 1
    return value.replace(tzinfo=timezone(sign * timedelta(hours=hours, minutes=minutes)))


class MomentInput:
    """A datetime-local input and, beside it, a select of UTC offsets."""

    def __call__(self, field: MomentField, **kwargs: Any) -> Markup:
        attrs = {"type": "datetime-local", "id": field.id, "name": field.name,
                 "value": field._value(), "step": "1", **kwargs}
        if field.flags.required:
            attrs["required"] = True
        html = [f"<input {_attrs(attrs)}>",
                f'<label class="offset-label" for="{field.id}-offset">UTC offset</label>',
                f'<select id="{field.id}-offset" name="{field.name}-offset">']
        chosen = field.offset_value()
        html += [f'<option value="{o}"{" selected" if o == chosen else ""}>UTC{o}</option>'
                 for o in offset_choices()]
        html.append("</select>")
        return Markup('<span class="moment">' + "".join(html) + "</span>")


def _attrs(attrs: dict[str, Any]) -> str:
    parts = []
    for key, value in attrs.items():
        if value is True:
            parts.append(key.replace("_", "-"))
        elif value is not False and value is not None:
            parts.append(f'{key.replace("_", "-")}="{escape(value)}"')
    return " ".join(parts)


def _now_here() -> datetime:
    return datetime.now().astimezone().replace(second=0, microsecond=0)


class MomentField(Field):
    """A timezone-aware instant; a value without an offset is refused, naming the field."""

    widget = MomentInput()

    def __init__(self, label: str | None = None, validators: Sequence[Any] | None = None,
                 **kwargs: Any) -> None:
        kwargs.setdefault("default", _now_here)
        super().__init__(label, validators, **kwargs)
        self.offset_raw: str | None = None

    def process(self, formdata: Any, data: Any = unset_value,
                extra_filters: Any = None) -> None:
        super().process(formdata, data, extra_filters)
        if formdata is None or not self.raw_data or not self.raw_data[0].strip():
            return
        self.offset_raw = formdata.get(f"{self.name}-offset", "")
        try:
            self.data = parse_moment(self.raw_data[0], self.offset_raw or "")
        except ValueError as exc:
            self.process_errors.append(str(exc))

    def process_formdata(self, valuelist: list[str]) -> None:
        # Parsed in process(), once the offset beside it is known.
        self.data = None

    def _value(self) -> str:
        if self.raw_data:
            return str(self.raw_data[0])
        return self.data.strftime("%Y-%m-%dT%H:%M") if isinstance(self.data, datetime) else ""

    def offset_value(self) -> str:
        """The offset to show selected: what was sent, else the value's, else the server's."""
        if self.offset_raw is not None:
            return self.offset_raw
        if isinstance(self.data, datetime) and self.data.utcoffset() is not None:
            return _offset_text(self.data.utcoffset() or timedelta(0))
        return server_offset()


# ---- shared fields --------------------------------------------------------------------


def _required(label: str) -> InputRequired:
    # The page prints the label before every message, so the message need not repeat it.
    return InputRequired(message="required: enter or choose a value")


def operator_field() -> SelectField:
    return SelectField("Operator", validators=[_required("Operator")],
                       description="The person this record is attributed to.")


def person_field(label: str, required: bool = True) -> SelectField:
    return SelectField(label, validators=[_required(label)] if required else [Optional()])


def location_field(label: str = "Location", required: bool = False) -> SelectField:
    return SelectField(label, validators=[_required(label)] if required else [Optional()])


def note_field() -> TextAreaField:
    return TextAreaField("Note", validators=[Optional(), Length(max=2000)])


class MultiCheckboxField(SelectMultipleField):
    """Several choices as a list of checkboxes."""

    widget = ListWidget(prefix_label=False)
    option_widget = CheckboxInput()


def _range_words(low: float | None, high: float | None) -> str:
    if high is None:
        return f"must be {low:g} or more"
    return f"must be from {low:g} to {high:g}"


def _number(label: str, low: float | None = 0, high: float | None = None,
            unit: str = "") -> FloatField:
    return FloatField(f"{label}" + (f" ({unit})" if unit else ""),
                      validators=[Optional(), NumberRange(min=low, max=high,
                                                          message=_range_words(low, high))])


# ---- custody desk ---------------------------------------------------------------------


class ReleaseForm(FlaskForm):
    operator = operator_field()
    to = person_field("Released to")
    at = MomentField("Time of release", validators=[_required("Time of release")])
    location = location_field()
    note = note_field()


class ReceiptForm(FlaskForm):
    operator = operator_field()
    giver = person_field("Received from", required=False)
    at = MomentField("Time of receipt", validators=[_required("Time of receipt")])
    location = location_field()
    condition = StringField("Condition on receipt", validators=[Optional(), Length(max=200)])
    note = note_field()


class StoreForm(FlaskForm):
    operator = operator_field()
    location = location_field("Store", required=True)
    slot = StringField("Slot", validators=[Optional(), Length(max=64)])
    at = MomentField("Time stored", validators=[_required("Time stored")])
    note = note_field()


SEAL_ACTIONS = choices([("seal-applied", "applied"), ("seal-checked", "checked"),
                        ("seal-broken", "broken")])


class SealForm(FlaskForm):
    operator = operator_field()
    action = RadioField("Seal", choices=SEAL_ACTIONS, validators=[_required("Seal")])
    seal_id = StringField("Seal id", validators=[_required("Seal id"), Length(max=64)])
    intact = RadioField("Seal intact (when checked)", choices=choices([("yes", "intact"),
                                                                       ("no", "NOT intact")]),
                        default="yes")
    at = MomentField("Time", validators=[_required("Time")])
    location = location_field()
    note = note_field()


class ShipForm(FlaskForm):
    operator = operator_field()
    carrier = StringField("Carrier", validators=[_required("Carrier"), Length(max=100)])
    tracking_id = StringField("Tracking id", validators=[Optional(), Length(max=100)])
    recipient = person_field("Recipient", required=False)
    at = MomentField("Time shipped", validators=[_required("Time shipped")])
    location = location_field()
    note = note_field()


class DeliverForm(FlaskForm):
    operator = operator_field()
    condition = StringField("Condition of the package",
                            validators=[_required("Condition of the package"), Length(max=200)])
    at = MomentField("Time delivered", validators=[_required("Time delivered")])
    location = location_field()
    note = note_field()


class InventoryForm(FlaskForm):
    operator = operator_field()
    location = location_field("Where the record says it is", required=True)
    found = RadioField("Found there?", choices=choices([("yes", "yes, found"), ("no", "NOT found")]),
                       validators=[_required("Found there?")])
    at = MomentField("Time checked", validators=[_required("Time checked")])
    note = note_field()


def _words(text: str | None) -> list[str]:
    """A comma- or line-separated list, blanks dropped."""
    return [w.strip() for w in (text or "").replace("\n", ",").split(",") if w.strip()]


class HandlingForm(FlaskForm):
    operator = operator_field()
    environment = RadioField("Environment", choices=[choice(e.value) for e in Environment],
                             validators=[_required("Environment")])
    start = MomentField("Start", validators=[_required("Start")])
    end = MomentField("End", validators=[_required("End")])
    location = location_field()
    o2_ppm = _number("O₂", unit="ppm")
    h2o_ppm = _number("H₂O", unit="ppm")
    iso_class = _number("ISO class", 1, 9)
    contact_materials = MultiCheckboxField("Contact materials",
                                           choices=[choice(m) for m in CONTACT_MATERIALS])
    tools = StringField("Tools and cleaning lot", validators=[Optional(), Length(max=500)],
                        description="Comma-separated, e.g. tweezers T3 (lot 2026-14)")
    controls = StringField("Controls present", validators=[Optional(), Length(max=500)],
                           description="Comma-separated codes of the controls alongside")
    note = note_field()

    def validate_end(self, field: MomentField) -> None:
        """The exposure cannot end before it starts."""
        start = self.start.data
        if isinstance(start, datetime) and isinstance(field.data, datetime) \
                and field.data < start:
            raise ValidationError("the end is before the start")

    def tool_list(self) -> list[str]:
        return _words(self.tools.data)

    def control_list(self) -> list[str]:
        return _words(self.controls.data)


# ---- environment ----------------------------------------------------------------------


def _channel_name(size: float) -> str:
    return "c" + f"{size:g}".replace(".", "_")


class CountsForm(FlaskForm):
    operator = operator_field()
    measured_at = MomentField("Measured at", validators=[_required("Measured at")])
    counter = StringField("Counter", validators=[Optional(), Length(max=100)])

    def counts(self) -> dict[float, float]:
        """The channels filled in: size µm → particles per m³."""
        return {size: self[_channel_name(size)].data for size in TABLE_SIZES_UM
                if self[_channel_name(size)].data is not None}

    def channel_fields(self) -> list[Field]:
        return [self[_channel_name(size)] for size in TABLE_SIZES_UM]


for _size in TABLE_SIZES_UM:
    setattr(CountsForm, _channel_name(_size),
            _number(f"≥ {_size:g} µm", unit="particles/m³"))


class AtmosphereForm(FlaskForm):
    operator = operator_field()
    measured_at = MomentField("Measured at", validators=[_required("Measured at")])
    o2_ppm = FloatField("O₂ (ppm)", validators=[_required("O₂"), NumberRange(min=0)])
    h2o_ppm = FloatField("H₂O (ppm)", validators=[_required("H₂O"), NumberRange(min=0)])


class AtmosphereFileForm(FlaskForm):
    operator = operator_field()
    file = FileField("Glovebox log (CSV)",
                     validators=[FileRequired(message="required: choose the CSV file")],
                     description="Columns measured_at, o2_ppm, h2o_ppm; every timestamp with "
                                 "its UTC offset. One bad row and nothing is imported.")
    source = StringField("Source", validators=[Optional(), Length(max=200)])


class ClimateForm(FlaskForm):
    operator = operator_field()
    measured_at = MomentField("Measured at", validators=[_required("Measured at")])
    temperature_C = FloatField("Temperature (°C)", validators=[_required("Temperature")])
    humidity_pct = FloatField("Relative humidity (%)",
                              validators=[_required("Relative humidity"),
                                          NumberRange(min=0, max=100)])


# ---- findings -------------------------------------------------------------------------


class FindingFilterForm(Form):
    """The findings list's GET filters (no CSRF: they change nothing)."""

    code = SelectField("Code", choices=[choice("", "any code"), *map(choice, CODES)],
                       validators=[Optional()])
    severity = SelectField("Severity", choices=choices([("", "any severity"), (ERROR, "error"),
                                                        (WARNING, "warning")]), validators=[Optional()])
    item = StringField("Item code", validators=[Optional(), Length(max=64)])
    study = StringField("Study code", validators=[Optional(), Length(max=64)])
    state = SelectField("State", choices=choices([("", "open and disposed"), ("open", "open"),
                                                  ("disposed", "disposed")]), validators=[Optional()])


class DispositionForm(FlaskForm):
    operator = operator_field()
    decision = RadioField("Decision", choices=choices([(Decision.ACCEPTED.value, "accepted"),
                                                       (Decision.FIXED.value,
                                                        "fixed by a correction")]),
                          validators=[_required("Decision")])
    reason = TextAreaField("Reason", validators=[_required("Reason"), Length(max=2000)])
    correction_id = IntegerField("Correction event #", validators=[Optional(),
                                                                   NumberRange(min=1)],
                                 description="When fixed: the id of the correction event.")


class ControlReadingForm(FlaskForm):
    operator = operator_field()
    control = SelectField("Control", validators=[_required("Control")])
    indicator = SelectField("Indicator", validators=[_required("Indicator")])
    measured_at = MomentField("Measured at", validators=[_required("Measured at")])
    value = FloatField("Value", validators=[_required("Value")])
    uncertainty = FloatField("Standard uncertainty", validators=[_required("Uncertainty"),
                                                                 NumberRange(min=0)])
    step = IntegerField("Measured by step (event #)", validators=[Optional(), NumberRange(min=1)],
                        description="The step that measured it, if it was logged at a station.")
    source = StringField("How it was measured", validators=[Optional(), Length(max=200)])


class ControlReadingsFileForm(FlaskForm):
    operator = operator_field()
    file = FileField("Control readings (CSV)",
                     validators=[FileRequired(message="required: choose the CSV file")],
                     description="Columns control, indicator, measured_at, value, uncertainty; "
                                 "every timestamp with its UTC offset. One bad row and nothing "
                                 "is imported.")
    source = StringField("Source", validators=[Optional(), Length(max=200)])
