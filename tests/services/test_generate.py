"""The synthetic collection: shape, determinism, and a ledger that verifies."""

from __future__ import annotations

import networkx as nx
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from curation import history, ledger, techniques
from curation.model import Derivation, Event, Item, Placement
from curation.services import generate


def _rows(session: Session) -> list[tuple[str, str, int]]:
    return [tuple(r) for r in session.execute(
        select(Item.code, Item.kind, func.count(Event.id)).outerjoin(Event, Event.item_id == Item.id)
        .where(Item.code.like("SYN5-%")).group_by(Item.code, Item.kind).order_by(Item.code))]


def test_small_collection_verifies_and_has_the_promised_shape(session: Session) -> None:
    made = generate.generate(session, generate.Plan(particles=4, seed=5, large_family=30))
    assert ledger.verify(session).ok
    assert made.counts["items"] == session.scalar(
        select(func.count()).select_from(Item).where(Item.code.like("SYN5-%")))
    # networkx as the outside reference for the depth of the derivation tree
    graph = nx.DiGraph(list(session.execute(select(Derivation.parent_id, Derivation.child_id))))
    root = session.scalar(select(Item.id).where(Item.code == made.large_family))
    depths = nx.single_source_shortest_path_length(graph, root)
    assert max(depths.values()) == generate.MAX_DEPTH
    assert len(depths) - 1 == 30 == len(history.descendants(session, [root]))
    needle = session.scalar(select(Item).where(Item.code == made.deep_needle))
    assert needle is not None and needle.kind == "needle"
    # the needle stands on a coupon in a mount in a capsule: three containers deep
    assert max(w.nesting_depth for w in history.windows(session, needle.id)) == 3
    families = {techniques.get(t).family for t in session.scalars(
        select(Event.technique).where(Event.technique.is_not(None)).distinct())}
    assert families == set(techniques.families())


def test_every_step_holds_parameters_the_catalogue_accepts(session: Session) -> None:
    generate.generate(session, generate.Plan(particles=2, seed=5))
    for code, details in session.execute(
            select(Event.technique, Event.details).where(Event.kind == "step")):
        assert techniques.validate(code, details).values == details


def test_same_seed_same_collection(session: Session) -> None:
    generate.generate(session, generate.Plan(particles=3, seed=5))
    first = _rows(session)
    session.rollback()
    generate.generate(session, generate.Plan(particles=3, seed=5))
    assert _rows(session) == first
    assert session.scalar(select(func.count()).select_from(Placement)) > 0
