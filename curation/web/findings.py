"""Findings: every audit finding with filters, one finding with its dispositions.

Findings are computed by the audit engine on each request; only dispositions are stored.
A disposition whose finding the audit no longer raises (a correction removed the cause) is
still listed, so a fix stays visible.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field

from flask import Blueprint, flash, redirect, render_template, request, url_for
from sqlalchemy import select
from sqlalchemy.orm import Session, selectinload
from werkzeug.wrappers import Response

from curation.audit import engine
from curation.audit.findings import ERROR, WARNING, Finding
from curation.errors import CurationError, InvalidInput, NotFound
from curation.model import Disposition, Event, Item, Study, StudyItem
from curation.services import findings as finding_service
from curation.services.common import person_by_username
from curation.web.app import db_session
from curation.web.forms import (
    DispositionForm,
    FindingFilterForm,
    attach_error,
    operator_choices,
)

bp = Blueprint("findings", __name__)

#: a shape for each severity, so severity never rests on colour alone
SEVERITY_MARKS = {ERROR: "✖", WARNING: "▲"}


@bp.app_context_processor
def _marks() -> dict[str, object]:
    return {"SEVERITY_MARKS": SEVERITY_MARKS}


@dataclass
class FindingRow:
    """A finding (None when the audit no longer raises it) with its dispositions, oldest first."""

    key: str
    code: str
    item_code: str
    finding: Finding | None
    dispositions: list[Disposition] = field(default_factory=list)

    @property
    def latest(self) -> Disposition | None:
        return self.dispositions[-1] if self.dispositions else None

    @property
    def earlier(self) -> list[Disposition]:
        return self.dispositions[:-1]

    @property
    def is_open(self) -> bool:
        return not self.dispositions


def disposition_history(session: Session, keys: Iterable[str]) -> dict[str, list[Disposition]]:
    """Every disposition of these findings, oldest first (the last one stands); one query."""
    found: dict[str, list[Disposition]] = {}
    wanted = sorted(set(keys))
    if wanted:
        for d in session.scalars(select(Disposition).where(Disposition.finding_key.in_(wanted))
                                 .options(selectinload(Disposition.actor))
                                 .order_by(Disposition.recorded_at, Disposition.id)):
            found.setdefault(d.finding_key, []).append(d)
    return found


def finding_rows(session: Session, findings: list[Finding]) -> list[FindingRow]:
    """Findings with their dispositions."""
    history = disposition_history(session, (f.key for f in findings))
    return [FindingRow(f.key, f.code, f.item_code, f, history.get(f.key, [])) for f in findings]


# ---- the list -------------------------------------------------------------------------


def _retired(session: Session, raised: set[str], item_ids: set[int] | None) -> list[FindingRow]:
    """Disposed findings the audit no longer raises, with their dispositions."""
    stmt = (select(Disposition).where(Disposition.finding_key.not_in(sorted(raised)))
            .options(selectinload(Disposition.actor), selectinload(Disposition.item))
            .order_by(Disposition.recorded_at, Disposition.id))
    if item_ids is not None:
        stmt = stmt.where(Disposition.item_id.in_(sorted(item_ids)))
    rows: dict[str, FindingRow] = {}
    for d in session.scalars(stmt):
        row = rows.setdefault(d.finding_key, FindingRow(d.finding_key, d.code, d.item.code, None))
        row.dispositions.append(d)
    return list(rows.values())


def _scope(session: Session, item: str, study: str) -> set[int] | None:
    """Ids of the items the filters allow, or None for every item."""
    if not item and not study:
        return None
    stmt = select(Item.id)
    if item:
        stmt = stmt.where(Item.code == item)
    if study:
        stmt = stmt.join(StudyItem, StudyItem.item_id == Item.id).join(
            Study, Study.id == StudyItem.study_id).where(Study.code == study)
    return set(session.scalars(stmt))


def list_findings(session: Session, form: FindingFilterForm) -> list[FindingRow]:
    """The findings (and retired dispositions) the filters select."""
    item, study = (form.item.data or "").strip(), (form.study.data or "").strip()
    raised = [f for f in engine.audit(session, item_codes=[item] if item else None,
                                      study=study or None)
              if form.code.data in ("", None, f.code)
              and form.severity.data in ("", None, f.severity)]
    rows = finding_rows(session, raised)
    if not form.severity.data:
        rows += [r for r in _retired(session, {f.key for f in raised},
                                     _scope(session, item, study))
                 if form.code.data in ("", None, r.code)]
    if form.state.data == "open":
        return [r for r in rows if r.is_open]
    if form.state.data == "disposed":
        return [r for r in rows if not r.is_open]
    return rows


@bp.get("/findings")
def finding_list() -> tuple[str, int]:
    """Every finding of the audit, filtered by code, severity, item, study and state."""
    form = FindingFilterForm(request.args)
    if not form.validate():
        return render_template("findings/list.html", form=form, rows=[]), 400
    rows = list_findings(db_session(), form)
    return render_template("findings/list.html", form=form, rows=rows), 200


# ---- one finding ----------------------------------------------------------------------


def find_row(session: Session, key: str) -> tuple[FindingRow, Item]:
    """The finding with this key and its item; one the audit no longer raises still opens,
    because the correction that fixes a finding is what makes it disappear."""
    code, _, rest = key.partition(":")
    item_id = rest.partition(":")[0]
    item = session.get(Item, int(item_id)) if item_id.isdigit() and code in engine.CODES \
        else None
    if item is None:
        raise NotFound(f"no finding with key {key!r}")
    raised = [f for f in engine.audit_item(session, item) if f.key == key]
    history = disposition_history(session, [key])
    return FindingRow(key, code, item.code, raised[0] if raised else None,
                      history.get(key, [])), item


def _evidence(session: Session, row: FindingRow) -> list[Event]:
    ids = list(row.finding.evidence) if row.finding else []
    return list(session.scalars(select(Event).where(Event.id.in_(ids)).order_by(
        Event.occurred_at, Event.id))) if ids else []


def _render(session: Session, row: FindingRow, item: Item, form: DispositionForm,
            status: int = 200) -> tuple[str, int]:
    return render_template("findings/finding.html", row=row, item=item, form=form,
                           evidence=_evidence(session, row)), status


def _form(session: Session) -> DispositionForm:
    form = DispositionForm(prefix="dispose")
    form.operator.choices = operator_choices(session)
    return form


@bp.get("/findings/<path:key>")
def finding_page(key: str) -> tuple[str, int]:
    """One finding: its evidence, its dispositions, and the form to record one."""
    session = db_session()
    row, item = find_row(session, key)
    return _render(session, row, item, _form(session))


@bp.post("/findings/<path:key>")
def dispose(key: str) -> Response | tuple[str, int]:
    """Record a disposition of the finding, then show it."""
    session = db_session()
    form = _form(session)
    row, item = find_row(session, key)
    if not form.validate_on_submit():
        return _render(session, row, item, form, 400)
    try:
        correction = _correction(session, form.correction_id.data)
        finding_service.dispose(
            session, actor=person_by_username(session, form.operator.data), finding_key=key, code=row.code,
            item=item, decision=form.decision.data, reason=form.reason.data or "",
            correction=correction)
    except CurationError as exc:
        attach_error(form, exc, {"correction": "correction_id"})
        return _render(session, row, item, form, 400)
    flash(f"Disposition recorded: {form.decision.data} — {row.code} on {item.code}")
    return redirect(url_for("findings.finding_page", key=key))


def _correction(session: Session, event_id: int | None) -> Event | None:
    if event_id is None:
        return None
    event = session.get(Event, event_id)
    if event is None:
        raise InvalidInput("correction_id", event_id, "the id of a recorded event")
    return event
