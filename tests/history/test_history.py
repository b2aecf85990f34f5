"""The history resolver on hand-built timelines, one rule per test."""

from __future__ import annotations

from sqlalchemy import event as sa_event

from curation import history
from curation.services import items
from tests.conftest import hours


def _reached(session, item, until=None):
    return {h.event.id: h for h in history.effective_history(session, item.id, until)}


def test_own_events_only(session, operator, make_item, make_event) -> None:
    a, b = make_item(), make_item()
    mine = make_event(a, 1)
    make_event(b, 1)
    got = _reached(session, a)
    assert set(got) == {mine.id}
    assert got[mine.id].reach == history.OWN and not got[mine.id].is_inherited


def test_container_events_count_only_while_inside(session, operator, make_item, make_event) -> None:
    particle, capsule = make_item(), make_item(kind="capsule")
    items.place(session, actor=operator, item=particle, container=capsule,
                placed_at=hours(2), removed_at=hours(5))
    before, at_placing, inside, at_removal, after = (
        make_event(capsule, h, kind="handling", environment="air") for h in (1, 2, 3, 5, 6))
    got = _reached(session, particle)
    # Closed windows: the instants of placing and removal belong to the stay.
    assert set(got) == {at_placing.id, inside.id, at_removal.id}
    assert got[inside.id].reach == history.CONTAINER
    assert got[inside.id].container_id == capsule.id
    assert got[inside.id].path == (particle.id, capsule.id)
    assert before.id not in got and after.id not in got


def test_an_exposure_overlapping_the_stay_counts(session, operator, make_item, make_event) -> None:
    particle, box = make_item(), make_item(kind="container")
    items.place(session, actor=operator, item=particle, container=box, placed_at=hours(2))
    long_exposure = make_event(box, 0, kind="handling", environment="air", ended_at=hours(3))
    over_before = make_event(box, 0, kind="handling", environment="air", ended_at=hours(1))
    got = _reached(session, particle)
    assert long_exposure.id in got and over_before.id not in got


def test_nested_containers(session, operator, make_item, make_event) -> None:
    needle, coupon, capsule = make_item(kind="needle"), make_item(kind="coupon"), make_item(kind="capsule")
    items.place(session, actor=operator, item=needle, container=coupon, placed_at=hours(1),
                position="post 7")
    items.place(session, actor=operator, item=coupon, container=capsule, placed_at=hours(2),
                removed_at=hours(4))
    early = make_event(capsule, 1.5, kind="custody", action="seal-checked")
    transit = make_event(capsule, 3, kind="custody", action="shipped")
    got = _reached(session, needle)
    assert early.id not in got
    assert got[transit.id].reach == history.CONTAINER
    assert got[transit.id].path == (needle.id, coupon.id, capsule.id)


def test_ancestor_events_up_to_the_cut(session, operator, make_item, make_event) -> None:
    particle, lamella, needle = make_item(), make_item(kind="lamella"), make_item(kind="needle")
    xct = make_event(particle, 1, technique="xct")
    liftout = make_event(particle, 3, technique="fib-liftout", is_destructive=True)
    later_on_particle = make_event(particle, 6, technique="sem-imaging")
    items.derive(session, actor=operator, parent=particle, child=lamella, derived_at=hours(3),
                 step=liftout)
    thinning = make_event(lamella, 4, technique="fib-lamella-thinning")
    after_cut = make_event(lamella, 7, technique="tem-imaging")
    items.derive(session, actor=operator, parent=lamella, child=needle, derived_at=hours(5))
    apt = make_event(needle, 8, technique="apt")
    got = _reached(session, needle)
    assert set(got) == {xct.id, liftout.id, thinning.id, apt.id}
    assert got[xct.id].reach == history.ANCESTOR and got[xct.id].ancestor_id == particle.id
    assert got[xct.id].path == (needle.id, lamella.id, particle.id)
    assert got[thinning.id].ancestor_id == lamella.id
    assert later_on_particle.id not in got and after_cut.id not in got


def test_ancestors_containers_up_to_the_cut(session, operator, make_item, make_event) -> None:
    particle, lamella, glovebox = make_item(), make_item(kind="lamella"), make_item(kind="container")
    items.place(session, actor=operator, item=particle, container=glovebox, placed_at=hours(0))
    in_box_before = make_event(glovebox, 1, kind="handling", environment="n2-glovebox")
    items.derive(session, actor=operator, parent=particle, child=lamella, derived_at=hours(2))
    in_box_after = make_event(glovebox, 3, kind="handling", environment="n2-glovebox")
    got = _reached(session, lamella)
    assert got[in_box_before.id].reach == history.ANCESTOR_CONTAINER
    assert got[in_box_before.id].ancestor_id == particle.id
    assert got[in_box_before.id].container_id == glovebox.id
    assert in_box_after.id not in got


def test_until_limits_everything(session, operator, make_item, make_event) -> None:
    particle, child = make_item(), make_item(kind="fragment")
    first = make_event(particle, 1)
    items.derive(session, actor=operator, parent=particle, child=child, derived_at=hours(4))
    own_early, own_late = make_event(child, 5), make_event(child, 9)
    assert set(_reached(session, child, until=hours(6))) == {first.id, own_early.id}
    assert set(_reached(session, child, until=hours(0.5))) == set()
    assert own_late.id in _reached(session, child)


def test_an_event_reached_twice_is_listed_once_by_its_most_direct_path(
        session, operator, make_item, make_event) -> None:
    particle, lamella, capsule = make_item(), make_item(kind="lamella"), make_item(kind="capsule")
    items.place(session, actor=operator, item=particle, container=capsule, placed_at=hours(0),
                removed_at=hours(2))
    items.derive(session, actor=operator, parent=particle, child=lamella, derived_at=hours(1))
    items.place(session, actor=operator, item=lamella, container=capsule, placed_at=hours(1))
    shared = make_event(capsule, 1.5, kind="handling", environment="vacuum")
    entries = [h for h in history.effective_history(session, lamella.id) if h.event.id == shared.id]
    assert len(entries) == 1 and entries[0].reach == history.CONTAINER


def test_child_with_two_parents(session, operator, make_item, make_event) -> None:
    left, right, mount = make_item(), make_item(), make_item(kind="mount")
    a, b = make_event(left, 1), make_event(right, 2)
    items.derive(session, actor=operator, parent=left, child=mount, derived_at=hours(3))
    items.derive(session, actor=operator, parent=right, child=mount, derived_at=hours(3))
    assert set(_reached(session, mount)) == {a.id, b.id}


def test_lineage_tree_from_any_member(session, operator, make_item) -> None:
    particle, lamella, n1, n2 = (make_item(), make_item(kind="lamella"),
                                 make_item(kind="needle"), make_item(kind="needle"))
    for parent, child in ((particle, lamella), (lamella, n1), (lamella, n2)):
        items.derive(session, actor=operator, parent=parent, child=child, derived_at=hours(1))
    tree = history.lineage_tree(session, n2.id)
    assert [(n.item.id, n.parent_id, n.depth) for n in tree] == [
        (particle.id, None, 0), (lamella.id, particle.id, 1), (n1.id, lamella.id, 2),
        (n2.id, lamella.id, 2)]


def test_history_is_one_statement_plus_constant_loads(session, operator, make_item, make_event,
                                                      connection) -> None:
    particle = make_item()
    parent = particle
    for depth in range(6):
        child = make_item(kind="fragment")
        items.derive(session, actor=operator, parent=parent, child=child, derived_at=hours(depth))
        make_event(parent, depth)
        parent = child
    statements: list[str] = []
    listener = lambda *args: statements.append(args[2])  # noqa: E731
    sa_event.listen(connection, "before_cursor_execute", listener)
    try:
        history.effective_history(session, parent.id)
    finally:
        sa_event.remove(connection, "before_cursor_execute", listener)
    # One recursive query for the timeline, then at most one select-in load per relationship.
    assert len(statements) <= 6


def test_contents_mirror_windows(session, operator, make_item) -> None:
    needle, coupon, capsule, other = (make_item(kind="needle"), make_item(kind="coupon"),
                                      make_item(kind="capsule"), make_item())
    items.place(session, actor=operator, item=needle, container=coupon, placed_at=hours(1))
    items.place(session, actor=operator, item=coupon, container=capsule, placed_at=hours(2),
                removed_at=hours(4))
    items.place(session, actor=operator, item=other, container=capsule, placed_at=hours(5))
    inside = {w.subject_id: w for w in history.contents(session, capsule.id, hours(0), hours(4.5))}
    assert set(inside) == {coupon.id, needle.id}
    assert (inside[needle.id].start, inside[needle.id].end) == (hours(2), hours(4))
    assert inside[needle.id].path == (capsule.id, coupon.id, needle.id)
    later = {w.subject_id for w in history.contents(session, capsule.id, hours(4.5), None)}
    assert later == {other.id}
