"""`curation export json` → `curation import json` round-trips a whole database."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from click.testing import CliRunner

from curation.cli import main
from tests.conftest import BACKENDS, empty_database_url


@pytest.fixture(params=BACKENDS)
def target(request: pytest.FixtureRequest, tmp_path: Path) -> str:
    """An empty database to import into."""
    return empty_database_url(request.param, tmp_path, "exchange")


def test_round_trip_of_the_demo(target: str, tmp_path: Path) -> None:
    run = CliRunner().invoke
    source = f"sqlite:///{tmp_path / 'source.db'}"
    assert run(main, ["demo", "--no-serve", "--db", source]).exit_code == 0
    dump = tmp_path / "all.json"
    assert run(main, ["export", "json", "--db", source, "-o", str(dump)]).exit_code == 0
    assert run(main, ["init", "--db", target]).exit_code == 0
    loaded = run(main, ["import", "json", str(dump), "--db", target])
    assert loaded.exit_code == 0 and "the ledger verifies" in loaded.output, loaded.output
    again = tmp_path / "again.json"
    assert run(main, ["export", "json", "--db", target, "-o", str(again)]).exit_code == 0
    assert json.loads(again.read_text()) == json.loads(dump.read_text())
    twice = run(main, ["import", "json", str(dump), "--db", target])
    assert twice.exit_code == 2 and "not empty" in twice.output
    # New work after the import gets fresh ids (PostgreSQL sequences moved past the copy).
    added = run(main, ["user", "add", "after-import", "--name", "A", "--role", "auditor",
                       "--db", target])
    assert added.exit_code == 0, added.output
