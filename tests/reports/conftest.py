"""A particle with a family of lamellae and needles, built through the services."""

from __future__ import annotations

from collections.abc import Callable

import pytest

from curation.model import DataFile, Item
from curation.services import events, items
from tests.conftest import hours

BEAM = {"accelerating_voltage_kV": 5, "beam_current_nA": 1.0, "exposure_time_s": 1.0,
        "exposed_area_um2": 1.0}


@pytest.fixture
def make_family(session, operator) -> Callable[..., Item]:
    """Factory: a particle with `lamellae` lamellae on a grid, each with one needle cut from it."""

    def make(code: str, lamellae: int) -> Item:
        def step(item: Item, at: float, technique: str, **extra) -> object:
            return events.record_event(session, actor=operator, kind="step", item=item,
                                       occurred_at=hours(at), ended_at=hours(at + 0.05),
                                       technique=technique, **extra)

        particle = items.register_item(session, actor=operator, code=code, kind="particle",
                                       created_at=hours(0), material="forsterite",
                                       mass_ug=2.0, mass_uncertainty_ug=0.1, mass_method="weighed")
        grid = items.register_item(session, actor=operator, code=f"{code}-G", kind="grid",
                                   created_at=hours(0))
        step(particle, 0.5, "sem-imaging", details=BEAM)
        for n in range(lamellae):
            t = 1 + n * 0.01
            cut = step(particle, t, "fib-liftout", is_destructive=True)
            lamella = items.register_item(session, actor=operator, code=f"{code}-L{n}",
                                          kind="lamella", created_at=hours(t),
                                          material="forsterite", volume_um3=200)
            items.derive(session, actor=operator, parent=particle, child=lamella,
                         derived_at=hours(t), step=cut, removed_volume_um3=7000)
            items.place(session, actor=operator, item=lamella, container=grid,
                        placed_at=hours(t))
            thin = step(lamella, t + 2, "tem-imaging", details=BEAM)
            session.add(DataFile(item_id=lamella.id, event_id=thin.id, path=f"/d/{n}.dm4",
                                 original_name=f"{n}.dm4", size_bytes=3, sha256="ab" * 32,
                                 actor_id=operator.id))
            sharpen = step(lamella, t + 3, "fib-needle-sharpening", is_destructive=True)
            needle = items.register_item(session, actor=operator, code=f"{code}-N{n}",
                                         kind="needle", created_at=hours(t + 3),
                                         material="forsterite", volume_um3=20)
            items.derive(session, actor=operator, parent=lamella, child=needle,
                         derived_at=hours(t + 3), step=sharpen, removed_volume_um3=20)
            step(needle, t + 5, "apt", is_destructive=True)
        session.flush()
        return particle

    return make
