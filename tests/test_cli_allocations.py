"""`curation allocations` and `curation report allocation` on the demo."""

from __future__ import annotations

import csv
import io
import json

from click.testing import CliRunner

from curation.cli import main


def _run(url: str, *args: str):
    return CliRunner().invoke(main, [*args, "--db", url])


def test_allocations_json(demo_url: str) -> None:
    result = _run(demo_url, "allocations", "--json")
    assert result.exit_code == 0, result.output
    rows = {r["reference"]: r for r in json.loads(result.output)}
    assert set(rows) == {"AMB-2025-031", "AMB-2026-004", "AMB-2026-004-T1"}
    assert rows["AMB-2026-004-T1"]["parent"] == "AMB-2026-004"
    assert rows["AMB-2025-031"]["balanced"] and not rows["AMB-2026-004"]["balanced"]


def test_report_by_suffix(demo_url: str, tmp_path) -> None:
    for suffix in ("pdf", "html", "csv"):
        out = tmp_path / f"r.{suffix}"
        result = _run(demo_url, "report", "allocation", "AMB-2026-004", "-o", str(out))
        assert result.exit_code == 0, result.output
    assert (tmp_path / "r.pdf").read_bytes().startswith(b"%PDF-")
    assert "KR-0313-N3" in (tmp_path / "r.html").read_text()
    rows = list(csv.DictReader(io.StringIO((tmp_path / "r.csv").read_text())))
    accounting = [r for r in rows if r["table"] == "accounting"]
    assert [(r["item"], r["balanced"]) for r in accounting] == [("KR-0313", "NO")]
    returned = [r for r in rows if r["table"] == "returns"]
    assert [r["item"] for r in returned] == ["KR-0313-L1"]


def test_unknown_suffix_is_refused(demo_url: str, tmp_path) -> None:
    result = _run(demo_url, "report", "allocation", "AMB-2026-004", "-o", str(tmp_path / "r.x"))
    assert result.exit_code != 0 and "unknown format" in result.output


def test_open_a_loan_and_issue_items_from_the_shell(tmp_path) -> None:
    from click.testing import CliRunner as Runner

    from curation.cli import main as cli

    url = f"sqlite:///{tmp_path / 'demo.db'}"
    run = Runner().invoke
    assert run(cli, ["demo", "--no-serve", "--db", url]).exit_code == 0
    opened = run(cli, ["allocations", "open", "FAC-2027-001", "--facility", "Test facility",
                       "--investigator", "rtolvanen", "--starts", "2026-01-05T09:00:00+00:00",
                       "--expires", "2027-01-05T09:00:00+00:00", "--as", "rtolvanen",
                       "--db", url])
    assert opened.exit_code == 0, opened.output
    naive = run(cli, ["allocations", "issue", "FAC-2027-001", "KR-0310", "--at",
                      "2026-01-06 10:00", "--as", "rtolvanen", "--db", url])
    assert naive.exit_code == 2 and "--at" in naive.output and "UTC offset" in naive.output
    issued = run(cli, ["allocations", "issue", "FAC-2027-001", "KR-0310", "KR-0311", "--at",
                       "2026-01-06T10:00:00+00:00", "--mass-ug", "0.4", "--mass-ug", "0.5",
                       "--as", "rtolvanen", "--db", url])
    assert issued.exit_code == 0, issued.output
    listed = run(cli, ["allocations", "--json", "--db", url])
    row = next(r for r in __import__("json").loads(listed.output)
               if r["reference"] == "FAC-2027-001")
    assert row["issued"] == 2
