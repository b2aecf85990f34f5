"""Environment rules: handling in a worse room or atmosphere than the study requires,
and air reaching an item that is kept pristine."""

from __future__ import annotations

from curation.audit.findings import ERROR, Finding, ItemContext
from curation.environment import check_atmosphere


def _iso_class(ev) -> float | None:  # type: ignore[no-untyped-def]
    value = (ev.details or {}).get("iso_class")
    if value is None and ev.location is not None:
        value = ev.location.iso_class
    return None if value is None else float(value)


def _glovebox_problems(ctx: ItemContext, ev) -> list[str]:  # type: ignore[no-untyped-def]
    """O2/H2O entered with the handling and logged by the box during it, over the limits."""
    limits = ctx.thresholds
    end = ev.ended_at or ev.occurred_at
    logged = [r for r in ctx.readings.get(ev.location_id, [])
              if ev.occurred_at <= r.measured_at <= end]
    details = ev.details or {}
    if details.get("o2_ppm") is None and details.get("h2o_ppm") is None and not logged:
        return []  # nothing known about the atmosphere: no evidence either way
    values = [(details.get("o2_ppm"), details.get("h2o_ppm"))] if details else []
    values += [(r.o2_ppm, r.h2o_ppm) for r in logged]
    problems: list[str] = []
    for o2, h2o in values:
        if o2 is None and h2o is None:
            continue
        check = check_atmosphere(o2 or 0.0, h2o or 0.0, max_o2_ppm=limits.max_o2_ppm,
                                 max_h2o_ppm=limits.max_h2o_ppm)
        problems += [p for p in check.problems if p not in problems]
    return problems


def environment_out_of_spec(ctx: ItemContext) -> list[Finding]:
    """Glovebox O2/H2O above the limits, or a cleanroom worse than the required class."""
    limits = ctx.thresholds
    found: list[Finding] = []
    for entry in ctx.where_it_was():
        ev = entry.event
        if ev.kind != "handling":
            continue
        if ev.environment == "n2-glovebox":
            problems = _glovebox_problems(ctx, ev)
            if problems:
                found.append(ctx.finding(
                    "environment-out-of-spec", ERROR,
                    f"glovebox handling of {ctx.item.code}: " + "; ".join(problems), [ev]))
        elif ev.environment == "cleanroom" and limits.required_iso_class is not None:
            iso = _iso_class(ev)
            if iso is None or iso > limits.required_iso_class:
                shown = "unknown" if iso is None else f"ISO {iso:g}"
                found.append(ctx.finding(
                    "environment-out-of-spec", ERROR,
                    f"{ctx.item.code} handled in a {shown} cleanroom; the study requires "
                    f"ISO {limits.required_iso_class:g} or better", [ev]))
    return found


def pristine_broken(ctx: ItemContext) -> list[Finding]:
    """Air exposure of an item kept pristine (on the item or a container it sat in)."""
    if not ctx.item.is_pristine:
        return []
    return [ctx.finding(
        "pristine-broken", ERROR,
        f"{ctx.item.code} is kept pristine but was exposed to air"
        + (f" ({entry.event.summary})" if entry.event.summary else ""), [entry.event])
        for entry in ctx.where_it_was()
        if entry.event.kind == "handling" and entry.event.environment == "air"]
