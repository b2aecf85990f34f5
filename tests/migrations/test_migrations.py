"""Migrations: one head, the models match them, and a populated round trip."""

from __future__ import annotations

import os
from collections.abc import Iterator

import pytest
from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import Engine, func, inspect, select
from sqlalchemy.orm import Session

from curation import ledger
from curation.db import (
    alembic_config, current_revision, downgrade_to, make_engine, upgrade_to_head,
)
from curation.model import Base, Item, LedgerEntry
from curation.services import accounts, events, items
from tests.conftest import BACKENDS, empty_database_url, hours


def test_one_head() -> None:
    heads = ScriptDirectory.from_config(alembic_config()).get_heads()
    assert len(heads) == 1, heads


def test_models_match_migrations(engine: Engine) -> None:
    with engine.connect() as conn:
        context = MigrationContext.configure(conn, opts={"compare_type": True})
        assert compare_metadata(context, Base.metadata) == []


@pytest.fixture(params=BACKENDS)
def scratch(request: pytest.FixtureRequest, tmp_path) -> Iterator[Engine]:
    """An empty database of its own, so downgrades do not disturb the shared one."""
    eng = make_engine(empty_database_url(request.param, tmp_path, "migrations"))
    yield eng
    eng.dispose()


def _populate(engine: Engine) -> int:
    with Session(engine) as session:
        who = accounts.add_person(session, actor="test", username="mig", name="Migration Test")
        capsule = items.register_item(session, actor=who, code="RT-CAP", kind="capsule",
                                      created_at=hours(0))
        grain = items.register_item(session, actor=who, code="RT-1", kind="particle",
                                    created_at=hours(0), mass_ug=1.8, mass_method="weighed")
        items.place(session, actor=who, item=grain, container=capsule, placed_at=hours(0))
        xct = events.record_event(session, actor=who, kind="step", item=grain,
                                  occurred_at=hours(1), technique="xct",
                                  details={"voxel_size_um": 0.5})
        # Rows that reference events, so table rebuilds must keep references intact.
        events.correct_event(session, actor=who, original=xct, reason="voxel size",
                             details={"voxel_size_um": 0.6})
        cut = events.record_event(session, actor=who, kind="step", item=grain,
                                  occurred_at=hours(2), technique="split")
        piece = items.register_item(session, actor=who, code="RT-1-F1", kind="fragment",
                                    created_at=hours(2))
        items.derive(session, actor=who, parent=grain, child=piece, derived_at=hours(2), step=cut)
        session.commit()
        return session.scalar(select(func.count()).select_from(LedgerEntry))


def test_round_trip_on_a_populated_database(scratch: Engine) -> None:
    script = ScriptDirectory.from_config(alembic_config())
    revisions = [r.revision for r in script.walk_revisions()]  # newest first
    upgrade_to_head(scratch)
    entries = _populate(scratch)
    # Step down one revision at a time and back up: every step's downgrade must run on data.
    for index, revision in enumerate(revisions):
        below = revisions[index + 1] if index + 1 < len(revisions) else "base"
        downgrade_to(scratch, below)
        assert current_revision(scratch) == (None if below == "base" else below)
        upgrade_to_head(scratch)
        assert current_revision(scratch) == revisions[0]
        if below != "base":
            with Session(scratch) as session:
                assert session.scalar(select(func.count()).select_from(LedgerEntry)) == entries
    downgrade_to(scratch, "base")
    assert set(inspect(scratch).get_table_names()) <= {"alembic_version"}
    upgrade_to_head(scratch)
    assert _populate(scratch) == entries
    with Session(scratch) as session:
        assert session.scalar(select(Item.code).where(Item.code == "RT-1")) == "RT-1"
        assert ledger.verify(session).ok


def test_upgrade_is_idempotent_at_head(tmp_path) -> None:
    eng = make_engine(f"sqlite:///{tmp_path / 'twice.db'}")
    upgrade_to_head(eng)
    upgrade_to_head(eng)
    assert current_revision(eng) == ScriptDirectory.from_config(alembic_config()).get_current_head()
    eng.dispose()


def test_migrations_ship_inside_the_package() -> None:
    # `pip install .` (not editable) must carry the migrations for `curation init`.
    folder = alembic_config().get_main_option("script_location")
    assert os.path.isfile(os.path.join(folder, "env.py"))
    assert "curation" in folder
