"""Contamination controls: indicators with baselines, links between controls and samples,
control readings (entered, or imported from CSV all or nothing)."""

from __future__ import annotations

import math
from collections.abc import Mapping
from datetime import datetime

from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import ledger
from curation.errors import InvalidInput, RuleViolation
from curation.model import CONTROL_KINDS, ControlLink, Event, Indicator, Item, Person, Study
from curation.services.common import aware, one_of, parse_csv
from curation.services.events import record_event

THRESHOLD_KINDS = ("absolute", "k-sigma")


def define_indicator(
    session: Session, *, actor: Person | str, study: Study, code: str, name: str, unit: str,
    baseline_value: float, baseline_uncertainty: float, threshold_kind: str,
    threshold_value: float, baseline_source: str = "",
) -> Indicator:
    """An indicator a study measures on its controls, with baseline and threshold."""
    ledger.attribute(session, actor)
    one_of("threshold_kind", threshold_kind, THRESHOLD_KINDS)
    for field, value in (("baseline_value", baseline_value),
                         ("baseline_uncertainty", baseline_uncertainty),
                         ("threshold_value", threshold_value)):
        if not math.isfinite(value):
            raise InvalidInput(field, value, "a finite number")
    if baseline_uncertainty < 0:
        raise InvalidInput("baseline_uncertainty", baseline_uncertainty, "zero or more")
    if threshold_kind == "k-sigma" and threshold_value <= 0:
        raise InvalidInput("threshold_value", threshold_value, "k > 0 standard uncertainties")
    if session.scalar(select(Indicator.id).where(
            Indicator.study_id == study.id, Indicator.code == code)) is not None:
        raise RuleViolation(f"study {study.code} already has an indicator {code!r}")
    indicator = Indicator(
        study_id=study.id, code=code, name=name, unit=unit, baseline_value=baseline_value,
        baseline_uncertainty=baseline_uncertainty, baseline_source=baseline_source,
        threshold_kind=threshold_kind, threshold_value=threshold_value)
    session.add(indicator)
    session.flush()
    return indicator


def link_control(
    session: Session, *, actor: Person | str, study: Study, control: Item,
    sample: Item | None = None, event: Event | None = None, note: str = "",
) -> ControlLink:
    """Record that a control travels with a sample, or was present at a handling event."""
    ledger.attribute(session, actor)
    if control.kind not in CONTROL_KINDS:
        raise InvalidInput("control", control.code,
                           "an item of a control kind: " + ", ".join(sorted(CONTROL_KINDS)))
    if sample is None and event is None:
        raise InvalidInput("sample", None, "a sample or a handling event the control accompanies")
    link = ControlLink(study_id=study.id, control_id=control.id,
                       sample_id=sample.id if sample else None,
                       event_id=event.id if event else None, note=note)
    session.add(link)
    session.flush()
    return link


def record_control_reading(
    session: Session, *, actor: Person, indicator: Indicator, control: Item,
    measured_at: datetime, value: float, uncertainty: float, step: Event | None = None,
    source: str = "",
) -> Event:
    """A reading of an indicator on a control, as a reading event on the control."""
    aware("measured_at", measured_at)
    if control.kind not in CONTROL_KINDS:
        raise InvalidInput("control", control.code, "an item of a control kind")
    if not math.isfinite(value):
        raise InvalidInput("value", value, "a finite number")
    if not (math.isfinite(uncertainty) and uncertainty >= 0):
        raise InvalidInput("uncertainty", uncertainty, "zero or more")
    details = {"indicator_id": indicator.id, "value": value, "uncertainty": uncertainty,
               "unit": indicator.unit}
    if step is not None:
        details["step_id"] = step.id
    if source:
        details["source"] = source
    return record_event(
        session, actor=actor, kind="reading", item=control, occurred_at=measured_at,
        action=indicator.code, details=details,
        summary=f"{indicator.name}: {value:g} ± {uncertainty:g} {indicator.unit}")


READING_COLUMNS = ("control", "indicator", "measured_at", "value", "uncertainty")


def _parse(line: int, row: Mapping[str, str], controls: Mapping[str, Item],
           indicators: Mapping[str, Indicator]) -> tuple | str:  # type: ignore[type-arg]
    control = controls.get((row.get("control") or "").strip())
    if control is None:
        return f"line {line}: control {row.get('control')!r} is not a control item"
    indicator = indicators.get((row.get("indicator") or "").strip())
    if indicator is None:
        return f"line {line}: indicator {row.get('indicator')!r} is not defined for this study"
    try:
        at = datetime.fromisoformat((row.get("measured_at") or "").strip())
    except ValueError:
        return f"line {line}: measured_at {row.get('measured_at')!r} is not an ISO 8601 timestamp"
    if at.tzinfo is None:
        return f"line {line}: measured_at {row['measured_at']!r} has no timezone offset"
    numbers = []
    for name in ("value", "uncertainty"):
        try:
            numbers.append(float(row.get(name) or ""))
        except ValueError:
            return f"line {line}: {name} {row.get(name)!r} is not a number"
        if not math.isfinite(numbers[-1]) or (name == "uncertainty" and numbers[-1] < 0):
            return f"line {line}: {name} {numbers[-1]:g} is not allowed (finite, uncertainty ≥ 0)"
    return control, indicator, at, numbers[0], numbers[1]


def import_control_readings_csv(session: Session, *, actor: Person, study: Study,
                                text: str, source: str = "") -> list[Event]:
    """Import readings (control, indicator, measured_at, value, uncertainty): all or none."""
    controls = {i.code: i for i in session.scalars(
        select(Item).where(Item.kind.in_([k.value for k in CONTROL_KINDS])))}
    indicators = {i.code: i for i in session.scalars(
        select(Indicator).where(Indicator.study_id == study.id))}
    parsed = parse_csv(text, READING_COLUMNS,
                       lambda line, row: _parse(line, row, controls, indicators))
    return [record_control_reading(session, actor=actor, indicator=ind, control=ctl,
                                   measured_at=at, value=v, uncertainty=u, source=source)
            for ctl, ind, at, v, u in parsed]
