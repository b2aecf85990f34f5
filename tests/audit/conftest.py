"""Fixtures for hand-built custody chains."""

from __future__ import annotations

from collections.abc import Callable

import pytest

from curation.audit.engine import audit_item
from curation.audit.findings import Finding
from curation.model import Item, Location, Person
from curation.services import accounts, stations
from tests.conftest import hours


@pytest.fixture
def people(session) -> dict[str, Person]:
    """Three custodians."""
    return {name: accounts.add_person(session, actor="test", username=f"cust-{name}",
                                      name=name.title())
            for name in ("alba", "bruno", "chen")}


@pytest.fixture
def places(session) -> dict[str, Location]:
    """A store and an instrument at lab A, an instrument at lab B, a glovebox, a cleanroom."""
    spec = {
        "store-a": ("store", "Lab A", None), "sem-a": ("instrument", "Lab A", None),
        "apt-b": ("instrument", "Lab B", None), "box-a": ("glovebox", "Lab A", None),
        "clean-a": ("cleanroom", "Lab A", 6.0),
    }
    return {code: stations.add_location(session, actor="test", code=f"L-{code}", name=code,
                                        kind=kind, laboratory=lab, iso_class=iso)
            for code, (kind, lab, iso) in spec.items()}


@pytest.fixture
def codes_for() -> Callable[..., list[str]]:
    """The finding codes an audit raises on an item, at a fixed 'now'."""

    def run(session, item: Item, now_hours: float = 100.0) -> list[str]:
        return [f.code for f in audit_item(session, item, now=hours(now_hours))]

    return run


@pytest.fixture
def findings_for() -> Callable[..., list[Finding]]:
    """The findings an audit raises on an item, at a fixed 'now'."""

    def run(session, item: Item, now_hours: float = 100.0) -> list[Finding]:
        return audit_item(session, item, now=hours(now_hours))

    return run


@pytest.fixture
def make_held(session, people, make_item) -> Callable[..., Item]:
    """Factory: an item Alba received at its creation, so it is in custody from the start."""
    from curation.services import custody

    def make(**overrides) -> Item:  # type: ignore[no-untyped-def]
        item = make_item(**overrides)
        custody.receive(session, actor=people["alba"], item=item, giver=None,
                        at=item.created_at)
        return item

    return make
