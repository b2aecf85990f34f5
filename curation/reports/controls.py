"""The contamination-control report of a study: every control reading against its baseline,
the failures, and for each failure the items that shared an exposure with the control."""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime
from html import escape

from sqlalchemy import select
from sqlalchemy.orm import Session

from curation.audit import contamination, engine
from curation.audit.findings import Finding
from curation.model import Disposition, Event, Indicator, Item, Study, StudyItem
from curation.services.common import study_by_code

#: how far the tracing follows shared exposures from a failed control by default
DEFAULT_DEPTH = 1


@dataclass(frozen=True)
class ReadingRow:
    """One control reading and its verdict."""

    event: Event
    indicator: Indicator
    verdict: contamination.Verdict


@dataclass(frozen=True)
class Failure:
    """A failed reading, the window it covers and the items at risk from it."""

    reading: ReadingRow
    window: tuple[datetime, datetime]
    at_risk: list[tuple[Item, contamination.AtRisk]]
    finding: Finding | None
    disposition: Disposition | None


@dataclass
class ControlsReport:
    """Everything the auditor's page and the controls report show."""

    study: Study
    indicators: list[Indicator]
    controls: list[Item]
    readings: dict[int, list[ReadingRow]] = field(default_factory=dict)
    failures: list[Failure] = field(default_factory=list)


def _controls(session: Session, study: Study) -> list[Item]:
    return list(session.scalars(
        select(Item).join(StudyItem, StudyItem.item_id == Item.id)
        .where(StudyItem.study_id == study.id, StudyItem.role == "control").order_by(Item.code)))


def controls_report(session: Session, study_code: str, depth: int = DEFAULT_DEPTH) -> ControlsReport:
    """Readings, verdicts, failures and traced items for one study."""
    study = study_by_code(session, study_code)
    report = ControlsReport(study, list(session.scalars(
        select(Indicator).where(Indicator.study_id == study.id).order_by(Indicator.code))),
        _controls(session, study))
    for control in report.controls:
        ctx = engine.context(session, control)
        rows = [ReadingRow(ev, ind, v) for ev, ind, v in contamination.reading_verdicts(ctx)
                if ind.study_id == study.id and ev.id not in ctx.superseded]
        report.readings[control.id] = rows
        findings = {f.evidence: f for f in contamination.control_failed(ctx)}
        decided = engine.dispositions(session, list(findings.values()))
        for row in rows:
            if not row.verdict.passed:
                report.failures.append(_failure(session, control, rows, row, findings, decided,
                                                depth))
    return report


def _failure(session: Session, control: Item, rows: list[ReadingRow], row: ReadingRow,
             findings: dict[tuple[int, ...], Finding], decided: dict[str, Disposition],
             depth: int) -> Failure:
    window = contamination.failure_window(
        [(r.event, r.indicator, r.verdict) for r in rows], row.event)
    traced = contamination.trace(session, control, window, depth)
    items = {i.id: i for i in session.scalars(
        select(Item).where(Item.id.in_([t.item_id for t in traced])))}
    finding = findings.get((row.event.id,))
    return Failure(row, window, [(items[t.item_id], t) for t in traced], finding,
                   decided.get(finding.key) if finding else None)


def readings_svg(rows: list[ReadingRow], indicator: Indicator, width: int = 640,
                 height: int = 220) -> str:
    """Readings over time against the baseline band (±2 u) and the limit, as SVG."""
    points = [(r.event.occurred_at, float(r.event.details["value"]), r.verdict.passed)
              for r in rows if r.indicator.id == indicator.id]
    if not points:
        return ""
    base, u = indicator.baseline_value, indicator.baseline_uncertainty
    limit = max((r.verdict.limit for r in rows if r.indicator.id == indicator.id), default=base)
    values = [v for _, v, _ in points] + [base - 2 * u, base + 2 * u, limit]
    low, high = min(values), max(values)
    span = (high - low) or 1.0
    times = [t for t, _, _ in points]
    t0, seconds = min(times), max((max(times) - min(times)).total_seconds(), 1.0)
    pad = 48

    def x(t: datetime) -> float:
        return pad + (width - 2 * pad) * (t - t0).total_seconds() / seconds

    def y(v: float) -> float:
        return height - pad / 2 - (height - pad) * (v - low) / span

    parts = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} {height}" '
             f'role="img" aria-label="{escape(indicator.name)} readings against the baseline">',
             f'<rect x="{pad}" y="{y(base + 2 * u):.1f}" width="{width - 2 * pad}" '
             f'height="{max(y(base - 2 * u) - y(base + 2 * u), 1):.1f}" fill="#d9e6f2"/>',
             f'<line x1="{pad}" x2="{width - pad}" y1="{y(base):.1f}" y2="{y(base):.1f}" '
             f'stroke="#345" stroke-dasharray="4 3"/>',
             f'<line x1="{pad}" x2="{width - pad}" y1="{y(limit):.1f}" y2="{y(limit):.1f}" '
             f'stroke="#000" stroke-width="2"/>',
             f'<text x="{width - pad}" y="{y(limit) - 4:.1f}" text-anchor="end" '
             f'font-size="12">limit {limit:.3g} {escape(indicator.unit)}</text>']
    for t, v, ok in points:
        cx, cy = x(t), y(v)
        parts.append(f'<circle cx="{cx:.1f}" cy="{cy:.1f}" r="6" fill="#fff" stroke="#000" '
                     f'stroke-width="2"/>' if ok else
                     f'<path d="M{cx - 7:.1f},{cy - 7:.1f}L{cx + 7:.1f},{cy + 7:.1f}'
                     f'M{cx - 7:.1f},{cy + 7:.1f}L{cx + 7:.1f},{cy - 7:.1f}" stroke="#000" '
                     f'stroke-width="3"/>')
    parts.append("</svg>")
    return "".join(parts)
