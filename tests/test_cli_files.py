"""`curation files verify`, `curation label` and `curation token` on a small SQLite database."""

from __future__ import annotations

import json
from datetime import UTC, datetime
from pathlib import Path

import pytest
import zxingcpp
from click.testing import CliRunner
from PIL import Image
from sqlalchemy.orm import Session

from curation.cli import main
from curation.db import make_engine, upgrade_to_head
from curation.services import accounts, files, items, stations

T0 = datetime(2026, 3, 2, 8, 0, tzinfo=UTC)


@pytest.fixture
def db(tmp_path: Path) -> tuple[str, Path]:
    """A database with two items, a station and two files registered on a share."""
    url, share = f"sqlite:///{tmp_path / 'cli.db'}", tmp_path / "share"
    share.mkdir()
    engine = make_engine(url)
    upgrade_to_head(engine)
    with Session(engine) as session:
        op = accounts.add_person(session, actor="setup", username="cli-op", name="Operator")
        room = stations.add_location(session, actor=op, code="RM", name="Room", kind="lab")
        stations.add_station(session, actor=op, code="ST-1", name="PC", instrument=None,
                             location=room)
        for code in ("CL-1", "CL-1-N1"):
            item = items.register_item(session, actor=op, code=code, kind="particle",
                                       created_at=T0, material="olivine")
            path = share / f"{code}.dat"
            path.write_bytes(code.encode())
            files.register_path(session, actor=op, item=item, path=str(path), roots=[share])
        session.commit()
    engine.dispose()
    return url, share


def test_files_verify_names_missing_and_changed(db: tuple[str, Path]) -> None:
    url, share = db
    ok = CliRunner().invoke(main, ["files", "verify", "--db", url])
    assert ok.exit_code == 0 and "2 file(s) checked: 2 unchanged" in ok.output
    (share / "CL-1.dat").write_bytes(b"edited")
    (share / "CL-1-N1.dat").unlink()
    bad = CliRunner().invoke(main, ["files", "verify", "--db", url, "--json"])
    assert bad.exit_code == 1
    report = json.loads(bad.output)
    assert not report["ok"] and report["checked"] == 2
    assert [r["item"] for r in report["changed"]] == ["CL-1"]
    assert [r["item"] for r in report["missing"]] == ["CL-1-N1"]
    human = CliRunner().invoke(main, ["files", "verify", "--db", url])
    assert "MISSING" in human.output and "CHANGED" in human.output and human.exit_code == 1


def test_label_sheet_png_and_pdf(db: tuple[str, Path], tmp_path: Path) -> None:
    url, _ = db
    out = tmp_path / "labels.png"
    made = CliRunner().invoke(main, ["label", "CL-1", "CL-1-N1", "-o", str(out), "--db", url])
    assert made.exit_code == 0, made.output
    with Image.open(out) as sheet:
        assert sorted(r.text for r in zxingcpp.read_barcodes(sheet)) == ["CL-1", "CL-1-N1"]
    pdf = CliRunner().invoke(main, ["label", "CL-1", "-o", str(tmp_path / "l.pdf"), "--db", url])
    assert pdf.exit_code == 0 and (tmp_path / "l.pdf").read_bytes().startswith(b"%PDF-")
    unknown = CliRunner().invoke(main, ["label", "NOPE", "-o", str(out), "--db", url])
    assert unknown.exit_code == 2 and "NOPE" in unknown.output
    svg = CliRunner().invoke(main, ["label", "CL-1", "-o", str(tmp_path / "l.svg"), "--db", url])
    assert svg.exit_code == 2 and ".png or .pdf" in svg.output


def test_token_add_list_revoke(db: tuple[str, Path]) -> None:
    url, _ = db
    added = CliRunner().invoke(main, ["token", "add", "ST-1", "--label", "uploader", "--db", url])
    assert added.exit_code == 0, added.output
    token = added.output.strip().splitlines()[-1]
    assert token.startswith("cur_") and len(token) > 40
    listed = CliRunner().invoke(main, ["token", "list", "--json", "--db", url])
    rows = json.loads(listed.output)
    assert [(r["station"], r["label"], r["revoked_at"]) for r in rows] == [
        ("ST-1", "uploader", None)]
    assert token not in listed.output
    revoked = CliRunner().invoke(main, ["token", "revoke", str(rows[0]["id"]), "--db", url])
    assert revoked.exit_code == 0 and "revoked" in revoked.output
    twice = CliRunner().invoke(main, ["token", "revoke", str(rows[0]["id"]), "--db", url])
    assert twice.exit_code == 2 and "already revoked" in twice.output
    nowhere = CliRunner().invoke(main, ["token", "add", "NO-ST", "--db", url])
    assert nowhere.exit_code == 2 and "NO-ST" in nowhere.output
