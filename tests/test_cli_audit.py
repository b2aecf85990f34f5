"""`curation audit` on the demo: the planted problems, nothing on the clean particles."""

from __future__ import annotations

import json

from click.testing import CliRunner

from curation.cli import main


def _audit(url: str, *args: str):
    return CliRunner().invoke(main, ["audit", "--db", url, *args])


def test_demo_audit_reports_the_planted_problems(demo_url: str) -> None:
    result = _audit(demo_url, "--json")
    assert result.exit_code == 1, result.output  # open errors remain
    report = json.loads(result.output)
    found = {(f["code"], f["item"]) for f in report["findings"]}
    codes = {code for code, _ in found}
    assert {"unreceived-transfer", "location-conflict", "pristine-broken"} <= codes
    assert report["open_errors"] == sum(1 for f in report["findings"]
                                        if f["severity"] == "error")
    assert all(f["evidence"] for f in report["findings"] if f["code"] != "orphan-item")


def test_clean_particles_have_no_findings(demo_url: str) -> None:
    flagged = {f["item"] for f in json.loads(_audit(demo_url, "--json").output)["findings"]}
    items = json.loads(CliRunner().invoke(main, ["items", "--db", demo_url, "--json",
                                                 "--kind", "particle"]).output)
    clean = [i["code"] for i in items if i["code"] not in flagged]
    assert clean, "the demo must keep clean particles"
    result = _audit(demo_url, "--json", *[a for code in clean for a in ("--item", code)])
    assert result.exit_code == 0 and json.loads(result.output)["findings"] == []


def test_human_output_and_unknown_study(demo_url: str) -> None:
    result = _audit(demo_url)
    assert "pristine-broken" in result.output and "open error(s)" in result.output
    empty = _audit(demo_url, "--study", "NO-SUCH-STUDY")
    assert empty.exit_code == 0 and "No findings." in empty.output


def test_progress_goes_to_a_watching_terminal_only(demo_url: str, monkeypatch) -> None:
    quiet = _audit(demo_url, "--json")
    assert "audited" not in quiet.stderr
    monkeypatch.setattr("curation.cli.audit._watched", lambda: True)
    watched = _audit(demo_url, "--json")
    assert watched.stdout == quiet.stdout  # the findings are untouched
    items = len(json.loads(CliRunner().invoke(main, ["items", "--db", demo_url,
                                                     "--json"]).output))
    assert f"audited {items:,} item(s) of at most {items:,}" in watched.stderr
