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


def environment_out_of_spec(ctx: ItemContext) -> list[Finding]:
    """Glovebox O2/H2O above the limits, or a cleanroom worse than the required class."""
    limits = ctx.thresholds
    found = []
    for entry in ctx.where_it_was():
        ev = entry.event
        if ev.kind != "handling":
            continue
        if ev.environment == "n2-glovebox":
            details = ev.details or {}
            check = check_atmosphere(details.get("o2_ppm"), details.get("h2o_ppm"),
                                     max_o2_ppm=limits.max_o2_ppm, max_h2o_ppm=limits.max_h2o_ppm)
            if not check.ok:
                found.append(ctx.finding(
                    "environment-out-of-spec", ERROR,
                    f"glovebox handling of {ctx.item.code}: " + "; ".join(check.problems), [ev]))
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
