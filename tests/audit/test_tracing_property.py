"""Co-exposure tracing against networkx reachability on random histories (hypothesis).

The reference builds the sharing relation pair by pair in plain Python, straight from the
definition in curation/audit/contamination.py, and asks networkx for everything reachable
from the control within the depth.
"""

from __future__ import annotations

from dataclasses import dataclass

import networkx as nx
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from curation.audit import contamination
from curation.services import events, items, stations
from tests.conftest import hours

INF = float("inf")


@dataclass
class World:
    n: int
    placements: list[tuple[int, int, int, int | None]]  # item, container, from, to
    events: list[tuple[int, int, int, int | None, str | None]]  # item, start, end, place, key
    cuts: list[tuple[int, int, int]]  # parent, child, at
    window: tuple[int, int]
    depth: int


@st.composite
def worlds(draw: st.DrawFn) -> World:
    n = draw(st.integers(3, 7))
    placements = []
    for item in range(n - 1):
        cursor = draw(st.integers(0, 4))
        for _ in range(draw(st.integers(0, 2))):
            length = draw(st.one_of(st.none(), st.integers(0, 4)))
            end = None if length is None else cursor + length
            placements.append((item, draw(st.integers(item + 1, n - 1)), cursor, end))
            if end is None:
                break
            cursor = end + draw(st.integers(1, 2))
    evts, keyed = [], set()
    for _ in range(draw(st.integers(0, 8))):
        start, item = draw(st.integers(0, 12)), draw(st.integers(0, n - 1))
        key = draw(st.one_of(st.none(), st.sampled_from(["k1", "k2"])))
        if (key, item) in keyed:
            key = None  # one event per item and submission, as the database requires
        keyed.add((key, item))
        evts.append((item, start, start + draw(st.integers(0, 3)),
                     draw(st.one_of(st.none(), st.integers(0, 1))), key))
    cuts = [(draw(st.integers(0, child - 1)), child, draw(st.integers(0, 12)))
            for child in range(1, n) if draw(st.booleans())]
    t0 = draw(st.integers(0, 10))
    return World(n, placements, evts, cuts, (t0, t0 + draw(st.integers(0, 6))),
                 draw(st.integers(1, 3)))


def _meet(a, b) -> bool:  # type: ignore[no-untyped-def]
    return a[0] <= b[1] and b[0] <= a[1]


def _cut(a, b):  # type: ignore[no-untyped-def]
    return max(a[0], b[0]), min(a[1], b[1])


def containers(w: World, x: int, span=(-INF, INF)) -> list[tuple[int, tuple[float, float]]]:  # type: ignore[no-untyped-def]
    out = []
    for item, box, start, stop in w.placements:
        inside = (start, INF if stop is None else stop)
        if item == x and _meet(inside, span):
            part = _cut(inside, span)
            out.append((box, part))
            out.extend(containers(w, box, part))
    return out


def holders(w: World, item: int, span) -> set[int]:  # type: ignore[no-untyped-def]
    return {item} | {y for y in range(w.n) for box, part in containers(w, y)
                     if box == item and _meet(part, span)}


def where_it_was(w: World, x: int, window) -> list[int]:  # type: ignore[no-untyped-def]
    boxes = containers(w, x)
    return [i for i, (item, start, end, _, _) in enumerate(w.events)
            if _meet((start, end), window) and (
                item == x or any(box == item and _meet(part, (start, end)) for box, part in boxes))]


def reference_graph(w: World) -> nx.DiGraph:
    window = w.window
    graph = nx.DiGraph()
    graph.add_nodes_from(range(w.n))
    for x in range(w.n):
        for box, part in containers(w, x):
            if _meet(part, window):
                graph.add_edge(x, box)
                graph.add_edges_from((x, y) for y in holders(w, box, _cut(part, window)))
        graph.add_edges_from((x, y) for y in holders(w, x, window))
        for i in where_it_was(w, x, window):
            _, start, end, place, key = w.events[i]
            span = _cut((start, end), window)
            for j, (other, s2, e2, place2, key2) in enumerate(w.events):
                same_key = key is not None and key2 == key
                same_place = place is not None and place2 == place and _meet((s2, e2), span)
                if j != i and (same_key or same_place):
                    graph.add_edges_from((x, y) for y in holders(w, other, _cut((s2, e2), window)))
        graph.add_edges_from((x, child) for parent, child, at in w.cuts
                             if parent == x and at >= window[0])
    graph.remove_edges_from(nx.selfloop_edges(graph))
    return graph


def build(session, operator, w: World):  # type: ignore[no-untyped-def]
    made = [items.register_item(session, actor=operator, code=f"X{i}", kind="container",
                                created_at=hours(0)) for i in range(w.n)]
    places = [stations.add_location(session, actor=operator, code=f"PL{i}", name=f"place {i}",
                                    kind="glovebox") for i in range(2)]
    for item, box, start, stop in w.placements:
        items.place(session, actor=operator, item=made[item], container=made[box],
                    placed_at=hours(start), removed_at=None if stop is None else hours(stop))
    for item, start, end, place, key in w.events:
        ev = events.record_event(session, actor=operator, kind="handling", item=made[item],
                                 occurred_at=hours(start), ended_at=hours(end),
                                 environment="n2-glovebox",
                                 location=None if place is None else places[place])
        ev.submission_key = key
    for parent, child, at in w.cuts:
        items.derive(session, actor=operator, parent=made[parent], child=made[child],
                     derived_at=hours(at))
    session.flush()
    return made


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(w=worlds())
def test_tracing_matches_networkx(session, operator, w: World) -> None:
    savepoint = session.begin_nested()
    try:
        made = build(session, operator, w)
        window = (hours(w.window[0]), hours(w.window[1]))
        got = {r.item_id: r.depth for r in contamination.trace(session, made[0], window, w.depth)}
        expected = nx.single_source_shortest_path_length(reference_graph(w), 0, cutoff=w.depth)
        assert got == {made[i].id: d for i, d in expected.items() if i != 0}
    finally:
        savepoint.rollback()
