"""The mass budget of one item (pure computation over rows already loaded).

initial = extracted into children + milled away + consumed by analysis + remaining.
Masses are in µg. A volume becomes a mass through the density its material names
(`techniques.densities`); uncertainties are standard uncertainties added in quadrature.
A derivation's removed volume is everything the step took from the parent, the child
included, so what was milled away around a child is the removed volume less the child's.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

from curation.audit.timeline import end_of_life
from curation.model import Derivation, Event, Item
from curation.techniques.densities import Density, density_for, mass_ug, xct_volume_um3


@dataclass(frozen=True)
class Mass:
    """A mass with its standard uncertainty and how it was obtained."""

    ug: float
    u_ug: float
    method: str


@dataclass
class MassBudget:
    """Where an item's mass went."""

    item: Item
    density: Density | None
    initial: Mass | None
    extracted: Mass = Mass(0.0, 0.0, "children")
    milled: Mass = Mass(0.0, 0.0, "removed volume")
    consumed: Mass = Mass(0.0, 0.0, "none")
    remaining: Mass | None = None
    #: True when the remaining mass was weighed after the last cut (a real check)
    remaining_measured: bool = False
    #: the events and derivations the numbers come from
    evidence: list[Event] = field(default_factory=list)
    #: XCT volume source (voxel count, voxel size) when the volume came from a scan
    xct: dict[str, float] | None = None

    @property
    def parts_ug(self) -> float:
        """children + milled + consumed + remaining, µg."""
        rest = self.remaining.ug if self.remaining else 0.0
        return self.extracted.ug + self.milled.ug + self.consumed.ug + rest

    @property
    def imbalance_ug(self) -> float:
        """initial minus the parts, µg (0 when remaining is only known by difference)."""
        return (self.initial.ug if self.initial else 0.0) - self.parts_ug

    @property
    def combined_u_ug(self) -> float:
        """Standard uncertainty of the imbalance, µg."""
        parts = [self.extracted, self.milled, self.consumed, self.remaining, self.initial]
        return math.sqrt(sum(p.u_ug**2 for p in parts if p is not None))

    def is_conserved(self, k: float = 2.0) -> bool:
        """Within k standard uncertainties; by difference only the cuts can overdraw."""
        if self.initial is None:
            return True
        if self.remaining_measured:
            return abs(self.imbalance_ug) <= k * self.combined_u_ug
        drawn = self.extracted.ug + self.milled.ug
        return drawn - self.initial.ug <= k * self.combined_u_ug


def _to_mass(volume: float | None, u_volume: float | None, density: Density | None,
             method: str) -> Mass | None:
    if volume is None or density is None:
        return None
    value = mass_ug(volume, density.g_per_cm3)
    rel = math.hypot((u_volume or 0.0) / volume if volume else 0.0,
                     density.half_range / density.g_per_cm3)
    return Mass(value, value * rel, method)


def xct_scan(events: Sequence[Event]) -> dict[str, float] | None:
    """The last XCT step that segmented the item: voxel count, voxel size, threshold."""
    for ev in reversed(events):
        details = ev.details or {}
        if ev.technique and ev.technique.startswith("xct") and details.get("voxel_count"):
            scan = {"voxel_count": float(details["voxel_count"]),
                    "voxel_size_um": float(details["voxel_size_um"])}
            if details.get("segmentation_threshold") is not None:
                scan["segmentation_threshold"] = float(details["segmentation_threshold"])
            return scan
    return None


def initial_mass(item: Item, density: Density | None, events: Sequence[Event]) -> Mass | None:
    """Entered mass first; else XCT voxels × voxel size³ × density; else entered volume."""
    if item.mass_ug is not None:
        return Mass(item.mass_ug, item.mass_uncertainty_ug or 0.0, item.mass_method or "entered")
    scan = xct_scan(events)
    if scan is not None:
        # half a voxel layer over the surface is the usual segmentation doubt: not counted
        volume = xct_volume_um3(scan["voxel_count"], scan["voxel_size_um"])
        return _to_mass(volume, None, density, "xct volume × density")
    return _to_mass(item.volume_um3, item.volume_uncertainty_um3, density,
                    f"{item.volume_method or 'entered'} volume × density")


def child_mass(child: Item, density: Density | None) -> Mass:
    """A child's mass: entered, else its volume × the density of its (or its parent's) material."""
    if child.mass_ug is not None:
        return Mass(child.mass_ug, child.mass_uncertainty_ug or 0.0, child.mass_method or "")
    own = density_for(child.material) if child.material else None
    found = _to_mass(child.volume_um3, child.volume_uncertainty_um3, own or density, "volume")
    return found or Mass(0.0, 0.0, "unknown")


def _sum(masses: Sequence[Mass], method: str) -> Mass:
    return Mass(sum(m.ug for m in masses), math.sqrt(sum(m.u_ug**2 for m in masses)), method)


def milled_away(children: Sequence[tuple[Derivation, Item]], own: Sequence[Event],
                density: Density | None) -> Mass:
    """Removed volume not carried off by a child, plus milling steps that made no child."""
    makers = {d.step_id for d, _ in children}
    volumes = [max(0.0, d.removed_volume_um3 - (c.volume_um3 or 0.0))
               for d, c in children if d.removed_volume_um3 is not None]
    volumes += [float((ev.details or {})["removed_volume_um3"]) for ev in own
                if ev.kind == "step" and ev.id not in makers
                and (ev.details or {}).get("removed_volume_um3") is not None]
    masses = [m for m in (_to_mass(v, None, density, "") for v in volumes) if m is not None]
    return _sum(masses, "removed volume × density")


def remaining_weighed(own: Sequence[Event], children: Sequence[tuple[Derivation, Item]]
                      ) -> tuple[Mass, Event] | None:
    """The last weighing after the last cut, if any."""
    last_cut = max((d.derived_at for d, _ in children), default=None)
    for ev in reversed(own):
        mass = (ev.details or {}).get("mass_ug")
        if ev.technique == "weighing" and mass is not None and (
                last_cut is None or ev.occurred_at > last_cut):
            return Mass(float(mass), float((ev.details or {}).get("mass_uncertainty_ug") or 0),
                        "weighed"), ev
    return None


def mass_budget(item: Item, children: Sequence[tuple[Derivation, Item]],
                own: Sequence[Event]) -> MassBudget:
    """The item's budget from its own events (corrections applied) and its children."""
    density = density_for(item.material) if item.material else None
    out = MassBudget(item, density, initial_mass(item, density, own), xct=xct_scan(own))
    out.extracted = _sum([child_mass(c, density) for _, c in children], "children")
    out.milled = milled_away(children, own, density)
    if out.initial is None:
        return out
    makers = {d.step_id for d, _ in children}
    out.evidence = [ev for ev in own if ev.id in makers]
    left = out.initial.ug - out.extracted.ug - out.milled.ug
    weighed = remaining_weighed(own, children)
    ended = end_of_life(list(own)) or next((ev for ev in own if ev.technique == "apt"), None)
    if weighed is not None:
        out.remaining, out.remaining_measured = weighed[0], True
        out.evidence.append(weighed[1])
    elif ended is not None or item.status == "consumed":
        out.consumed = Mass(max(left, 0.0), 0.0, "by difference (consumed)")
        out.remaining = Mass(0.0, 0.0, "consumed")
        out.evidence += [ended] if ended is not None else []
    else:
        out.remaining = Mass(max(left, 0.0), 0.0, "by difference")
    return out
