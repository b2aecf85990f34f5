"""`curation backup` and `curation restore` on both databases: same ledger head, verified."""

from __future__ import annotations

import re
from collections.abc import Iterator
from pathlib import Path

import pytest
from click.testing import CliRunner
from sqlalchemy import create_engine, text
from sqlalchemy.engine import make_url

from curation.cli import main
from tests.conftest import require_postgres


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def url(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[str]:
    """An empty database of its own."""
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path / 'live.db'}"
        return
    base = make_url(require_postgres())
    name = f"{base.database}_backup"
    admin = create_engine(base.set(database="postgres"), isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    admin.dispose()
    yield base.set(database=name).render_as_string(hide_password=False)


def _head(output: str) -> str:
    found = re.search(r"ledger head (\d+) ([0-9a-f]{16})", output)
    assert found, output
    return found.group(0)


def test_backup_then_restore_gives_back_the_same_ledger_head(url: str, tmp_path: Path) -> None:
    run = CliRunner().invoke
    assert run(main, ["demo", "--no-serve", "--db", url]).exit_code == 0
    saved = run(main, ["backup", "--db", url, "-o", str(tmp_path / "copy.bak")])
    assert saved.exit_code == 0, saved.output
    # Work goes on after the backup: a new record moves the ledger head on.
    later = run(main, ["controls", "indicator", "PEL-RIM-H2O", "late", "--name", "x", "--unit",
                       "u", "--baseline", "1", "--uncertainty", "0.1", "--threshold-kind",
                       "absolute", "--threshold", "2", "--as", "rtolvanen", "--db", url])
    assert later.exit_code == 0, later.output
    back = run(main, ["restore", str(tmp_path / "copy.bak"), "--yes", "--db", url])
    assert back.exit_code == 0, back.output
    assert _head(back.output) == _head(saved.output)
    assert "the ledger verifies" in back.output
    again = run(main, ["backup", "--db", url, "-o", str(tmp_path / "copy.bak")])
    assert again.exit_code == 2 and "exists already" in again.output
