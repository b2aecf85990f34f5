"""The allocation report: what a facility lent, what became of every microgram, what was made
and measured, what came out, and what remains where, for the whole loan or one reporting period.

Gathered in a fixed number of queries whatever the number of items: the accounting's rows come
from `audit.allocations.load` (IN queries over the families), files, studies, outputs and
dispositions from one IN query each. The mass accounting is as of now; steps, subsamples and
files are those inside the period when one is chosen. Findings are the allocation findings
(computed from the same rows); every other audit finding is on the findings page.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field
from datetime import datetime, timedelta

from sqlalchemy import select
from sqlalchemy.orm import Session, joinedload

from curation.audit import allocations as accounting
from curation.audit import engine
from curation.audit.findings import Finding
from curation.db import utcnow
from curation.errors import InvalidInput
from curation.model import (
    Allocation,
    AllocationMember,
    AllocationOutput,
    AllocationReport,
    DataFile,
    Derivation,
    Disposition,
    Event,
    Item,
    Study,
    StudyItem,
)
from curation.reports import controls
from curation.services.allocations import DOI_PATTERN, allocation_by_reference


@dataclass(frozen=True)
class TechniqueRow:
    """Steps of one technique on the allocation's items: count and instrument hours."""

    technique: str
    count: int
    hours: float


@dataclass(frozen=True)
class ControlSummary:
    """One study's controls in a line each: readings, failures, items at risk."""

    study_code: str
    controls: int
    readings: int
    failures: int
    at_risk: int


@dataclass
class AllocationReportData:
    """Everything the allocation report shows."""

    allocation: Allocation
    period: AllocationReport | None
    now: datetime
    data: accounting.Loaded
    accounts: list[accounting.Account]
    members: list[AllocationMember]
    subsamples: list[Derivation]
    steps: list[Event]
    techniques: list[TechniqueRow]
    files: list[DataFile]
    findings: list[tuple[Finding, Disposition | None]]
    controls: list[ControlSummary]
    outputs: list[AllocationOutput]
    transfers: list[Allocation] = field(default_factory=list)

    @property
    def reports(self) -> list[AllocationReport]:
        return self.data.reports.get(self.allocation.id, [])

    @property
    def returns(self) -> list[accounting.Part]:
        return [p for a in self.accounts for p in a.parts if p.term == "returned"]

    @property
    def remaining(self) -> list[accounting.Part]:
        return [p for a in self.accounts for p in a.parts
                if p.term in ("remaining", accounting.UNACCOUNTED)]

    def family_items(self) -> list[Item]:
        """Every item of the issued items' families, issued items first."""
        ids = [i for a in self.accounts for i in self.data.family(a.link.item_id)]
        return [self.data.items[i] for i in dict.fromkeys(ids)]


def doi_ok(doi: str) -> bool:
    """The DOI has DataCite's 4.5 schema form (see services.allocations.DOI_PATTERN)."""
    return bool(DOI_PATTERN.match(doi))


def _period(data: accounting.Loaded, allocation: Allocation,
            period_id: int | None) -> AllocationReport | None:
    if period_id is None:
        return None
    for r in data.reports.get(allocation.id, []):
        if r.id == period_id:
            return r
    raise InvalidInput("period", period_id, f"a reporting period of {allocation.reference}")


def _inside(at: datetime, period: AllocationReport | None) -> bool:
    return period is None or period.period_start <= at <= period.period_end


def build(session: Session, reference: str, period_id: int | None = None,
          now: datetime | None = None) -> AllocationReportData:
    """The report of the allocation `reference`, for one period (by id) or the whole loan."""
    allocation = allocation_by_reference(session, reference)
    now = now or utcnow()
    data = accounting.load(session, [allocation.id])
    period = _period(data, allocation, period_id)
    accs = accounting.accounts(data, allocation.id)
    ids = sorted({i for a in accs for i in a.budgets})
    steps = [e for i in ids for e in data.events.get(i, []) if e.kind == "step"
             and e.occurred_at >= allocation.starts_at and _inside(e.occurred_at, period)]
    steps.sort(key=lambda e: (e.occurred_at, e.id))
    return AllocationReportData(
        allocation=allocation, period=period, now=now, data=data, accounts=accs,
        members=_members(session, allocation),
        subsamples=[d for i in ids for d, _ in data.children.get(i, [])
                    if _inside(d.derived_at, period)],
        steps=steps, techniques=techniques(steps), files=_files(session, steps),
        findings=_findings(session, data, ids, now),
        controls=_controls(session, ids),
        outputs=list(session.scalars(select(AllocationOutput).where(
            AllocationOutput.allocation_id == allocation.id).order_by(
            AllocationOutput.year, AllocationOutput.id))),
        transfers=[a for a in data.allocations.values() if a.parent_id == allocation.id])


def techniques(steps: list[Event]) -> list[TechniqueRow]:
    """Count and instrument hours (occurred_at to ended_at) of each technique."""
    count: dict[str, int] = defaultdict(int)
    seconds: dict[str, float] = defaultdict(float)
    for e in steps:
        name = e.technique or "unnamed"
        count[name] += 1
        if e.ended_at is not None:
            seconds[name] += (e.ended_at - e.occurred_at).total_seconds()
    return [TechniqueRow(t, count[t], seconds[t] / 3600) for t in sorted(count)]


def _members(session: Session, allocation: Allocation) -> list[AllocationMember]:
    return list(session.scalars(select(AllocationMember).where(
        AllocationMember.allocation_id == allocation.id)
        .options(joinedload(AllocationMember.person)).order_by(AllocationMember.id)))


def _files(session: Session, steps: list[Event]) -> list[DataFile]:
    if not steps:
        return []
    return list(session.scalars(select(DataFile).where(
        DataFile.event_id.in_([e.id for e in steps])).options(joinedload(DataFile.item))
        .order_by(DataFile.id)))


def _findings(session: Session, data: accounting.Loaded, ids: list[int],
              now: datetime) -> list[tuple[Finding, Disposition | None]]:
    """The allocation findings on this allocation's items, with their dispositions."""
    wanted = set(ids)
    found = [f for f in accounting.findings(data, now) if f.item_id in wanted]
    decided = engine.dispositions(session, found)
    return [(f, decided.get(f.key)) for f in found]


def _controls(session: Session, ids: list[int]) -> list[ControlSummary]:
    """The controls report of each study the allocation's items are in, in one line each."""
    if not ids:
        return []
    codes = session.scalars(select(Study.code).join(StudyItem, StudyItem.study_id == Study.id)
                            .where(StudyItem.item_id.in_(ids)).distinct().order_by(Study.code))
    out = []
    for code in list(codes):
        r = controls.controls_report(session, code)
        out.append(ControlSummary(code, len(r.controls), sum(len(v) for v in r.readings.values()),
                                  len(r.failures), sum(len(f.at_risk) for f in r.failures)))
    return out


# ---- the dashboard --------------------------------------------------------------------

#: "due soon" means within this many days
SOON_DAYS = 30


@dataclass(frozen=True)
class Due:
    """Something owed to the facility, and whether it is overdue, due soon or later."""

    what: str
    at: datetime
    state: str


@dataclass(frozen=True)
class DashboardRow:
    """One allocation on the dashboard."""

    allocation: Allocation
    issued: int
    held: int
    balanced: bool
    dues: list[Due]

    @property
    def worst(self) -> str:
        states = {d.state for d in self.dues}
        return next((s for s in ("overdue", "due soon") if s in states), "on time")


def _state(at: datetime, now: datetime) -> str:
    if at < now:
        return "overdue"
    return "due soon" if at <= now + timedelta(days=SOON_DAYS) else "later"


def _dues(data: accounting.Loaded, a: Allocation, held: int, now: datetime) -> list[Due]:
    dues = [Due(f"report {r.period_start:%Y-%m-%d} to {r.period_end:%Y-%m-%d}", r.due_at,
                _state(r.due_at, now))
            for r in data.reports.get(a.id, []) if r.submitted_at is None]
    if a.report_due_at is not None and not any(
            r.submitted_at for r in data.reports.get(a.id, [])):
        dues.append(Due("the allocation's report", a.report_due_at, _state(a.report_due_at, now)))
    if a.expires_at is not None and held:
        dues.append(Due(f"return of {held} held item{'s' if held != 1 else ''} (loan expires)",
                        a.expires_at, _state(a.expires_at, now)))
    return sorted(dues, key=lambda d: d.at)


def dashboard(session: Session, now: datetime | None = None) -> list[DashboardRow]:
    """Every allocation with what is overdue and what is due within SOON_DAYS days."""
    now = now or utcnow()
    data = accounting.load(session)
    rows = []
    for a in data.allocations.values():
        accs = accounting.accounts(data, a.id)
        held = sum(1 for acc in accs for p in acc.parts
                   if p.term in ("remaining", accounting.UNACCOUNTED))
        rows.append(DashboardRow(a, len(accs), held, all(x.is_balanced for x in accs),
                                 _dues(data, a, held, now)))
    order = {"overdue": 0, "due soon": 1, "on time": 2}
    return sorted(rows, key=lambda r: (order[r.worst], r.allocation.reference))
