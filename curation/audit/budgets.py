"""Budget rules: dose and exposure over the study's limits, steps out of the required order,
mass that does not add up. Each finding names the events that add up to it.

Limits a study sets raise errors; the soft defaults by material class raise warnings.
"""

from __future__ import annotations

from collections.abc import Callable

from curation.audit import exposure, mass
from curation.audit.findings import ERROR, WARNING, Finding, ItemContext
from curation.model import Event


def _events(pairs: list[tuple[Event, float]]) -> list[Event]:
    return [ev for ev, _ in pairs]


def _over(ctx: ItemContext, code: str, what: str, total: float, limit: float | None,
          unit: str, evidence: list[Event]) -> list[Finding]:
    """One error when a total over the effective history passes the study's limit."""
    if limit is None or total <= limit:
        return []
    return [ctx.finding(code, ERROR, f"{ctx.item.code}: {what} {total:.4g} {unit} over its "
                                     f"history; the study allows {limit:g} {unit}", evidence)]


def dose_over_limit(ctx: ItemContext) -> list[Finding]:
    """Cumulative electron dose or ion fluence over the study's limit; one acquisition over
    the per-acquisition limit (the study's, else the material class default)."""
    t = ctx.thresholds
    b = ctx.budget()
    found = _over(ctx, "dose-over-limit", "electron dose", b.electron_e_per_A2,
                  t.max_electron_dose_e_per_A2, "e⁻/Å²", _events(b.electron_events))
    limit, by_study = exposure.acquisition_limit(
        ctx.item.material, t.max_electron_dose_per_acquisition_e_per_A2)
    whose = "the study's" if by_study else "the default for this material class"
    found += [ctx.finding(
        "dose-over-limit", ERROR if by_study else WARNING,
        f"one {ev.technique} acquisition gave {ctx.item.code} {dose:.4g} e⁻/Å², over {whose} "
        f"{limit:g} e⁻/Å² per acquisition", [ev])
        for ev, dose in b.electron_events if dose > limit]
    return found + _over(ctx, "dose-over-limit", "ion fluence", b.ion_fluence_ions_per_cm2,
                         t.max_ion_fluence_ions_per_cm2, "ions/cm²", _events(b.ion_events))


def exposure_over_limit(ctx: ItemContext) -> list[Finding]:
    """Air minutes, X-ray time or heating temperature over the study's limits."""
    t = ctx.thresholds
    b = ctx.budget()
    hottest = max((k for _, k in b.heating_events), default=0.0)
    hot = [(ev, k) for ev, k in b.heating_events
           if t.max_temperature_K is not None and k > t.max_temperature_K]
    return (_over(ctx, "exposure-over-limit", "air exposure", b.air_minutes, t.max_air_minutes,
                  "min", b.air_events)
            + _over(ctx, "exposure-over-limit", "X-ray time", b.xray_s, t.max_xray_s, "s",
                    _events(b.xray_events))
            + _over(ctx, "exposure-over-limit", "highest temperature", hottest,
                    t.max_temperature_K, "K", _events(hot)))


def _steps(ctx: ItemContext) -> list[Event]:
    return [h.event for h in ctx.current() if h.event.kind == "step" and h.event.technique]


def technique_order(ctx: ItemContext) -> list[Finding]:
    """A step that the study's technique order puts before a step already done."""
    rank = {name: n for n, name in enumerate(ctx.thresholds.technique_order)}
    found, latest = [], None
    for ev in _steps(ctx):
        if ev.technique not in rank:
            continue
        if latest is not None and rank[ev.technique] < rank[latest.technique or ""]:
            found.append(ctx.finding(
                "order-violation", ERROR,
                f"{ev.technique} on {ctx.item.code} came after {latest.technique}; the study "
                f"puts {ev.technique} first", [latest, ev]))
        elif latest is None or rank[ev.technique] > rank[latest.technique or ""]:
            latest = ev
    return found


def _before(ctx: ItemContext, target: str) -> list[tuple[Event, list[Event]]]:
    """Each `target` step with the steps before it on the item's timeline."""
    steps = _steps(ctx)
    return [(ev, steps[:n]) for n, ev in enumerate(steps) if ev.technique == target]


def dose_before_apt(ctx: ItemContext) -> list[Finding]:
    """More electron dose before an atom-probe run than the study allows."""
    limit = ctx.thresholds.max_electron_dose_before_apt_e_per_A2
    if limit is None:
        return []
    found = []
    for run, earlier in _before(ctx, "apt"):
        doses = [(ev, d.electron_dose_e_per_A2) for ev in earlier
                 if (d := ctx.dose(ev)) and d.electron_dose_e_per_A2]
        total = sum(v for _, v in doses)
        if total > limit:
            found.append(ctx.finding(
                "order-violation", ERROR,
                f"{ctx.item.code} had {total:.4g} e⁻/Å² before its atom-probe run; the study "
                f"allows {limit:g} e⁻/Å² before APT", [*(ev for ev, _ in doses), run]))
    return found


def _flag_before(ctx: ItemContext, target: str, hit: Callable[[Event], bool], severity: str,
                 message: str) -> list[Finding]:
    """An order-violation for each `target` step preceded by steps that `hit` picks out."""
    found = []
    for run, earlier in _before(ctx, target):
        hits = [ev for ev in earlier if hit(ev)]
        if hits:
            found.append(ctx.finding("order-violation", severity, message, [*hits, run]))
    return found


def _carbon_coat(ev: Event) -> bool:
    return ev.technique == "coating" and (ev.details or {}).get("coating_material") == "carbon"


def coat_before_carbon(ctx: ItemContext) -> list[Finding]:
    """A carbon coat before an analysis the study marks as measuring carbon."""
    return [f for target in ctx.thresholds.carbon_analysis_techniques
            for f in _flag_before(ctx, target, _carbon_coat, ERROR,
                                  f"{ctx.item.code} was carbon-coated before {target}, which "
                                  "the study uses for carbon")]


def gallium_before_apt(ctx: ItemContext) -> list[Finding]:
    """A Ga-beam step before an atom-probe run (Ga implantation spoils trace elements)."""
    if not ctx.thresholds.flag_ga_before_apt:
        return []
    return _flag_before(ctx, "apt", lambda ev: (ev.details or {}).get("ion_species") == "Ga",
                        WARNING, f"{ctx.item.code} met a Ga ion beam before its atom-probe "
                                 "run: implanted Ga may show in trace-element results")


def order_violation(ctx: ItemContext) -> list[Finding]:
    """Every order rule of the study."""
    return [*technique_order(ctx), *dose_before_apt(ctx), *coat_before_carbon(ctx),
            *gallium_before_apt(ctx)]


def mass_not_conserved(ctx: ItemContext) -> list[Finding]:
    """children + milled + consumed + remaining differs from the initial mass beyond k·u."""
    b = mass.mass_budget(ctx.item, ctx.children, ctx.own())
    k = ctx.thresholds.mass_coverage_factor
    if b.initial is None or b.is_conserved(k):
        return []
    drawn = b.extracted.ug + b.milled.ug + (b.remaining.ug if b.remaining_measured
                                            and b.remaining else 0.0)
    return [ctx.finding(
        "mass-not-conserved", ERROR,
        f"{ctx.item.code}: initial {b.initial.ug:.4g} ± {b.initial.u_ug:.2g} µg, but children "
        f"{b.extracted.ug:.4g} µg + milled {b.milled.ug:.4g} µg"
        + (f" + remaining {b.remaining.ug:.4g} µg (weighed)" if b.remaining_measured and
           b.remaining else "")
        + f" = {drawn:.4g} µg (more than {k:g} standard uncertainties apart)",
        b.evidence, at=None)]
