"""An item's exposure, dose and mass budgets with the limits they are held to.

The numbers come from the audit's pure computations (`audit.exposure`, `audit.mass`) over
the context the audit itself reads, so a page, a report and a finding never disagree.
"""

from __future__ import annotations

from dataclasses import dataclass

from sqlalchemy.orm import Session

from curation.audit import engine, exposure, mass
from curation.audit.findings import ItemContext, Thresholds
from curation.model import Item
from curation.techniques.densities import material_class


@dataclass(frozen=True)
class Limit:
    """One limit as shown beside its total: value, unit and where it comes from."""

    name: str
    total: float | None
    limit: float | None
    unit: str
    source: str

    @property
    def is_over(self) -> bool:
        return self.total is not None and self.limit is not None and self.total > self.limit


@dataclass(frozen=True)
class ItemBudget:
    """Exposure and dose over the effective history, the mass budget, and the limits."""

    item: Item
    exposure: exposure.Budget
    mass: mass.MassBudget
    limits: list[Limit]
    material_class: str


def limits(t: Thresholds, b: exposure.Budget, material: str) -> list[Limit]:
    """Each total beside its limit (None where the study sets none)."""
    study = "study rules"
    per_acq, by_study = exposure.acquisition_limit(
        material, t.max_electron_dose_per_acquisition_e_per_A2)
    largest = max((d for _, d in b.electron_events), default=None)
    return [
        Limit("air exposure", b.air_minutes, t.max_air_minutes, "min", study),
        Limit("electron dose", b.electron_e_per_A2, t.max_electron_dose_e_per_A2, "e⁻/Å²", study),
        Limit("largest single acquisition", largest, per_acq, "e⁻/Å²",
              study if by_study else f"default for {material_class(material)} material "
                                     "(common practice, from memory)"),
        Limit("ion fluence", b.ion_fluence_ions_per_cm2, t.max_ion_fluence_ions_per_cm2,
              "ions/cm²", study),
        Limit("X-ray time", b.xray_s, t.max_xray_s, "s", study),
        Limit("highest temperature", b.max_temperature_K, t.max_temperature_K, "K", study),
    ]


def item_budget(session: Session, item: Item) -> ItemBudget:
    """The budgets of one item, from the audit's context (a fixed number of queries)."""
    return budget_of(engine.context(session, item))


def budget_of(ctx: ItemContext) -> ItemBudget:
    """The budgets of the context's item."""
    item, spent = ctx.item, ctx.budget()
    return ItemBudget(item, spent, mass.mass_budget(item, ctx.children, ctx.own()),
                      limits(ctx.thresholds, spent, item.material),
                      material_class(item.material))
