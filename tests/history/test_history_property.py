"""The resolver against a brute-force reference on random item graphs (hypothesis).

The reference is plain Python written straight from the definition in history.py's
docstring, and networkx's `ancestors` for the derivation graph.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import networkx as nx
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from curation import history
from curation.services import events, items
from tests.conftest import hours

INF = float("inf")


@dataclass
class World:
    n: int
    derivations: list[tuple[int, int, int]]  # parent, child, at
    placements: list[tuple[int, int, int, int | None]]  # item, container, from, to
    events: list[tuple[int, int, int | None]]  # item, at, ended
    query: int
    until: int | None


@st.composite
def worlds(draw: st.DrawFn) -> World:
    n = draw(st.integers(2, 7))
    derivations = []
    for child in range(1, n):
        for parent in draw(st.sets(st.integers(0, child - 1), max_size=2)):
            derivations.append((parent, child, draw(st.integers(0, 8))))
    placements = []
    for item in range(n - 1):
        # Containers have a higher index than what they hold, so nesting never cycles.
        cursor = draw(st.integers(0, 3))
        for _ in range(draw(st.integers(0, 2))):
            container = draw(st.integers(item + 1, n - 1))
            length = draw(st.one_of(st.none(), st.integers(0, 4)))
            end = None if length is None else cursor + length
            placements.append((item, container, cursor, end))
            if end is None:
                break
            cursor = end + draw(st.integers(0, 2))
    evts = []
    for _ in range(draw(st.integers(1, 12))):
        at = draw(st.integers(0, 10))
        ended = draw(st.one_of(st.none(), st.integers(at, at + 3)))
        evts.append((draw(st.integers(0, n - 1)), at, ended))
    query = draw(st.integers(0, n - 1))
    until = draw(st.one_of(st.none(), st.integers(0, 10)))
    return World(n, derivations, placements, evts, query, until)


def reference(w: World) -> dict[int, tuple[int, int]]:
    """Event index -> (ancestor depth, nesting depth) of its most direct path."""
    best: dict[int, tuple[int, int]] = {}

    def visit(subject: int, lo: float, hi: float, depth: int, nesting: int) -> None:
        for index, (item, at, ended) in enumerate(w.events):
            end = at if ended is None else ended
            if item == subject and at <= hi and end >= lo:
                best[index] = min(best.get(index, (depth, nesting)), (depth, nesting))
        for item, container, start, stop in w.placements:
            stop_ = INF if stop is None else stop
            if item == subject and start <= hi and stop_ >= lo:
                visit(container, max(lo, start), min(hi, stop_), depth, nesting + 1)

    def lineage(item: int, cutoff: float, depth: int) -> None:
        visit(item, -INF, cutoff, depth, 0)
        for parent, child, at in w.derivations:
            if child == item and at <= cutoff:
                lineage(parent, min(cutoff, at), depth + 1)

    lineage(w.query, INF if w.until is None else w.until, 0)
    return best


def build(session, operator, w: World):
    made = [items.register_item(session, actor=operator, code=f"W{i}", kind="particle",
                                created_at=hours(0)) for i in range(w.n)]
    for parent, child, at in w.derivations:
        items.derive(session, actor=operator, parent=made[parent], child=made[child],
                     derived_at=hours(at))
    for item, container, start, stop in w.placements:
        items.place(session, actor=operator, item=made[item], container=made[container],
                    placed_at=hours(start), removed_at=None if stop is None else hours(stop))
    ids = [events.record_event(session, actor=operator, kind="handling", item=made[item],
                               occurred_at=hours(at), environment="air",
                               ended_at=None if ended is None else hours(ended)).id
           for item, at, ended in w.events]
    return made, ids


def _reach(depth: int, nesting: int) -> str:
    if depth == 0:
        return history.OWN if nesting == 0 else history.CONTAINER
    return history.ANCESTOR if nesting == 0 else history.ANCESTOR_CONTAINER


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(w=worlds())
def test_resolver_matches_brute_force(session, operator, w: World) -> None:
    savepoint = session.begin_nested()
    try:
        made, ids = build(session, operator, w)
        until = None if w.until is None else hours(w.until)
        got = {h.event.id: h.reach for h in history.effective_history(session, made[w.query].id, until)}
        expected = {ids[i]: _reach(*pair) for i, pair in reference(w).items()}
        assert got == expected

        graph = nx.DiGraph([(made[p].id, made[c].id) for p, c, _ in w.derivations])
        graph.add_nodes_from(m.id for m in made)
        resolved = {a for a, _, _ in history.ancestors(session, made[w.query].id)}
        assert resolved == nx.ancestors(graph, made[w.query].id)
        below = {d for d, _, _ in history.descendants(session, [made[w.query].id])}
        assert below == nx.descendants(graph, made[w.query].id)

        # the batched resolver (the audit's) answers for every item at once, each as if asked alone
        every = [m.id for m in made]
        batch = history.effective_histories(session, every, until)
        lines = history.ancestors_of(session, every)
        for k, m in enumerate(made):
            alone = {ids[i]: _reach(*pair) for i, pair in reference(replace(w, query=k)).items()}
            assert {h.event.id: h.reach for h in batch[m.id]} == alone
            assert {a for a, _, _ in lines[m.id]} == nx.ancestors(graph, m.id)
    finally:
        savepoint.rollback()
