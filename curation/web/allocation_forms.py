"""The allocation page's forms: fields and their checks only (services check the rules)."""

from __future__ import annotations

from flask_wtf import FlaskForm
from wtforms import FloatField, IntegerField, SelectField, StringField, TextAreaField
from wtforms.validators import InputRequired, Length, NumberRange, Optional

from curation.services.allocations import MEMBER_ROLES, OUTPUT_KINDS
from curation.web.forms import MomentField, choices, operator_field, person_field


def _required() -> InputRequired:
    return InputRequired(message="required: enter or choose a value")


class MemberForm(FlaskForm):
    operator = operator_field()
    person = person_field("Person")
    role = SelectField("Role", choices=choices((r, r) for r in MEMBER_ROLES),
                       validators=[_required()])


class PeriodForm(FlaskForm):
    operator = operator_field()
    period_start = MomentField("Period starts", validators=[_required()])
    period_end = MomentField("Period ends", validators=[_required()])
    due_at = MomentField("Report due", validators=[_required()])


class SubmitForm(FlaskForm):
    operator = operator_field()
    report = SelectField("Reporting period", validators=[_required()])
    submitted_at = MomentField("Sent to the facility at", validators=[_required()])


class ReturnForm(FlaskForm):
    operator = operator_field()
    item = StringField("Item code", validators=[_required(), Length(max=64)],
                       description="The item sent back: an issued item, or a section or mount "
                                   "cut from one.")
    returned_at = MomentField("Returned at", validators=[_required()])
    mass_ug = FloatField("Mass at return (µg)", validators=[Optional(), NumberRange(min=0)])
    condition = StringField("Condition", validators=[Optional(), Length(max=300)])
    event_id = IntegerField("Custody event #", validators=[Optional(), NumberRange(min=1)],
                            description="The release or shipment that sent it.")
    due_at = MomentField("Facility's date for the return", validators=[Optional()],
                         default=None)


class TransferForm(FlaskForm):
    operator = operator_field()
    reference = StringField("Reference of the transfer", validators=[_required(),
                                                                     Length(max=64)])
    laboratory = StringField("Receiving laboratory", validators=[_required(), Length(max=200)])
    investigator = person_field("Investigator there")
    items = StringField("Item codes", validators=[_required(), Length(max=2000)],
                        description="Separated by spaces or commas.")
    issued_at = MomentField("Transferred at", validators=[_required()])


class OutputForm(FlaskForm):
    operator = operator_field()
    kind = SelectField("Kind", choices=choices((k, k) for k in OUTPUT_KINDS),
                       validators=[_required()])
    doi = StringField("DOI", validators=[_required(), Length(max=200)],
                      description="For example 10.1234/abc-5")
    title = TextAreaField("Title", validators=[_required(), Length(max=500)])
    year = IntegerField("Year", validators=[Optional(), NumberRange(min=1900, max=2999)])


#: form name -> (form class, heading)
FORMS: dict[str, tuple[type[FlaskForm], str]] = {
    "member": (MemberForm, "Name a member"),
    "period": (PeriodForm, "Add a reporting period"),
    "submit": (SubmitForm, "Record a report as sent"),
    "return": (ReturnForm, "Record a return"),
    "transfer": (TransferForm, "Transfer items to another laboratory"),
    "output": (OutputForm, "Add a publication or data set"),
}
