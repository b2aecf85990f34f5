"""bench/run.py at its tiny size, so the benchmarks cannot rot (they are not timed here)."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).parent.parent


def test_bench_runs_at_tiny_size_and_prints_every_result() -> None:
    env = {k: v for k, v in os.environ.items() if k != "CURATION_BENCH_PG_URL"}
    done = subprocess.run([sys.executable, str(ROOT / "bench" / "run.py"), "--tiny", "--json"],
                          capture_output=True, text=True, timeout=300, env=env, check=True)
    out = json.loads(done.stdout)
    names = {r["name"].split(":")[0] for r in out["results"]}
    assert names == {"history", "item page", "lineage report", "import", "load", "audit"}
    for r in out["results"]:
        assert set(r) >= {"name", "database", "value", "baseline", "ratio", "goal", "met"}
        assert r["database"] == "sqlite" and r["value"] > 0 and r["baseline"] > 0
    assert out["skipped"] == ["postgresql skipped: CURATION_BENCH_PG_URL not set"]
