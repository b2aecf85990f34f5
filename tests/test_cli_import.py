"""`curation import events` and `curation bench generate` from the shell."""

from __future__ import annotations

import json

from click.testing import CliRunner

from curation.cli import main


def test_generate_then_import_all_or_nothing(tmp_path) -> None:
    url = f"sqlite:///{tmp_path / 'bench.db'}"
    run = CliRunner().invoke
    made = run(main, ["bench", "generate", "--particles", "2", "--seed", "3", "--db", url,
                      "--json"])
    assert made.exit_code == 0, made.output
    summary = json.loads(made.output)
    particle, operator = summary["large_family"], summary["operator"]
    good = tmp_path / "good.csv"
    good.write_text("item,kind,occurred_at,action\n"
                    f"{particle},custody,2031-03-01T10:00:00+01:00,inventory-check\n")
    bad = tmp_path / "bad.jsonl"
    bad.write_text(json.dumps({"item": particle, "kind": "custody", "action": "store",
                               "occurred_at": "2031-03-01T10:00:00Z"}) + "\n"
                   + json.dumps({"item": particle, "kind": "teleport",
                                 "occurred_at": "2031-03-01T10:00:00Z"}) + "\n")
    refused = run(main, ["import", "events", str(bad), "--actor", operator, "--db", url])
    assert refused.exit_code == 2 and "line 2: kind" in refused.output
    ok = run(main, ["import", "events", str(good), "--actor", operator, "--db", url, "--json"])
    assert ok.exit_code == 0, ok.output
    assert json.loads(ok.output) == {"events": 1, "by_kind": {"custody": 1}}
    assert run(main, ["ledger", "verify", "--db", url]).exit_code == 0
    again = run(main, ["bench", "generate", "--particles", "1", "--seed", "3", "--db", url])
    assert again.exit_code != 0
