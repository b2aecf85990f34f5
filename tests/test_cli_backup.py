"""`curation backup` and `curation restore` on both databases: same ledger head, verified."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from curation.cli import main
from tests.conftest import BACKENDS, empty_database_url


@pytest.fixture(params=BACKENDS)
def url(request: pytest.FixtureRequest, tmp_path: Path) -> str:
    """An empty database of its own."""
    return empty_database_url(request.param, tmp_path, "backup")


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
