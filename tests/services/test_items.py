"""Item graph writes and the refusals that name the problem."""

from __future__ import annotations

from datetime import datetime

import pytest

from curation.errors import (
    ContainmentCycle, DerivationCycle, DuplicateCode, InvalidInput, NaiveTimestamp,
    OverlappingPlacement,
)
from curation.services import items
from tests.conftest import hours


def test_duplicate_code_is_refused_even_in_other_case(make_item) -> None:
    make_item(code="HX-0001")
    with pytest.raises(DuplicateCode, match="HX-0001"):
        make_item(code="HX-0001")
    with pytest.raises(DuplicateCode, match="hx-0001"):
        make_item(code="hx-0001")


@pytest.mark.parametrize("code", ["", "has space", "x" * 65, "semi;colon"])
def test_unprintable_codes_are_refused(make_item, code: str) -> None:
    with pytest.raises(InvalidInput) as caught:
        make_item(code=code)
    assert caught.value.field == "code"


def test_naive_timestamp_is_refused_naming_the_field(make_item) -> None:
    with pytest.raises(NaiveTimestamp) as caught:
        make_item(created_at=datetime(2026, 1, 1, 12, 0))
    assert caught.value.field == "created_at"
    assert "2026-01-01T12:00:00" in str(caught.value)


def test_bad_kind_and_negative_mass_name_the_field(make_item) -> None:
    with pytest.raises(InvalidInput, match="kind: 'rock'"):
        make_item(kind="rock")
    with pytest.raises(InvalidInput, match="mass_ug: -1"):
        make_item(mass_ug=-1.0)


def test_derivation_cycle_is_refused(session, operator, make_item) -> None:
    a, b, c = make_item(), make_item(), make_item()
    items.derive(session, actor=operator, parent=a, child=b, derived_at=hours(1))
    items.derive(session, actor=operator, parent=b, child=c, derived_at=hours(2))
    with pytest.raises(DerivationCycle, match=f"{a.code} is already an ancestor of {c.code}"):
        items.derive(session, actor=operator, parent=c, child=a, derived_at=hours(3))
    with pytest.raises(DerivationCycle):
        items.derive(session, actor=operator, parent=a, child=a, derived_at=hours(3))


def test_container_that_would_contain_itself_is_refused(session, operator, make_item) -> None:
    needle, coupon, capsule = make_item(kind="needle"), make_item(kind="coupon"), make_item(kind="capsule")
    items.place(session, actor=operator, item=coupon, container=capsule, placed_at=hours(0))
    items.place(session, actor=operator, item=needle, container=coupon, placed_at=hours(1))
    with pytest.raises(ContainmentCycle, match="contain itself"):
        items.place(session, actor=operator, item=capsule, container=needle, placed_at=hours(2))
    with pytest.raises(ContainmentCycle):
        items.place(session, actor=operator, item=capsule, container=capsule, placed_at=hours(2))


def test_swapping_nesting_at_different_times_is_allowed(session, operator, make_item) -> None:
    a, b = make_item(kind="container"), make_item(kind="container")
    items.place(session, actor=operator, item=a, container=b, placed_at=hours(0),
                removed_at=hours(1))
    assert items.place(session, actor=operator, item=b, container=a, placed_at=hours(1)).id


def test_overlapping_placements_are_refused(session, operator, make_item) -> None:
    particle, mount, stub = make_item(), make_item(kind="mount"), make_item(kind="stub")
    items.place(session, actor=operator, item=particle, container=mount, placed_at=hours(0),
                removed_at=hours(5))
    with pytest.raises(OverlappingPlacement, match=mount.code):
        items.place(session, actor=operator, item=particle, container=stub, placed_at=hours(4))
    assert items.place(session, actor=operator, item=particle, container=stub,
                       placed_at=hours(5)).container_id == stub.id


def test_move_closes_the_open_placement(session, operator, make_item) -> None:
    particle, mount, stub = make_item(), make_item(kind="mount"), make_item(kind="stub")
    first = items.place(session, actor=operator, item=particle, container=mount, placed_at=hours(0))
    second = items.move(session, actor=operator, item=particle, container=stub, moved_at=hours(3),
                        position="B2")
    assert first.removed_at == hours(3)
    assert items.current_placement(session, particle) is second


def test_removal_before_placement_is_refused(session, operator, make_item) -> None:
    particle, mount = make_item(), make_item(kind="mount")
    with pytest.raises(InvalidInput, match="removed_at"):
        items.place(session, actor=operator, item=particle, container=mount, placed_at=hours(2),
                    removed_at=hours(1))
