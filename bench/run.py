"""Run every benchmark: the application against its raw-SQL (or in-process) baseline.

    python bench/run.py [--json] [--full | --tiny]

SQLite always; PostgreSQL too when CURATION_BENCH_PG_URL names a database it may wipe.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

sys.path[:0] = [str(Path(__file__).parent), str(Path(__file__).parent.parent)]

import audit_bench
import history_bench
import import_bench
import load_bench
import pages_bench
from common import PG_ENV, SIZES, Result, Size, backends, fresh_engine, populate


def run_backend(backend: str, size: Size, say: bool) -> list[Result]:
    """Every benchmark on one database."""
    engine = fresh_engine(backend, "main")
    url = engine.url.render_as_string(hide_password=False)
    made = populate(engine, size.particles, size.large_family)
    codes = {"large_family": made.large_family, "deep_needle": made.deep_needle,
             "station": made.station, "operator": made.operator}
    if say:
        print(f"# {backend}: {made.counts}", file=sys.stderr)
    results = history_bench.run(engine, size, codes)
    results += pages_bench.run(engine, url, made.large_family)
    results += import_bench.run(engine, size, made.operator)
    results += load_bench.run(url, size, codes)
    engine.dispose()
    results += audit_bench.run(backend, size)
    return results


def table(results: list[Result]) -> str:
    """The results as a plain text table."""
    header = (f"{'benchmark':<64} {'db':<10} {'value':>10} {'baseline':>10} {'ratio':>8} "
              f"{'goal':>6}  met")
    lines = [header]
    for r in results:
        goal = {"at-least": ">=", "absolute": "<="}.get(r.kind, "<=") + f"{r.goal:g}"
        lines.append(f"{r.name:<64} {r.database:<10} {r.value:>10.4g} {r.baseline:>10.4g} "
                     f"{r.ratio:>8.2f} {goal:>6}  {'yes' if r.met else 'NO'}"
                     + (f"  ({r.note})" if r.note else ""))
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    """Parse the options, run, print."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--json", action="store_true", help="print {'results': [...]} as JSON")
    group = parser.add_mutually_exclusive_group()
    group.add_argument("--full", action="store_true", help="mission scale (hours; not for CI)")
    group.add_argument("--tiny", action="store_true", help="seconds: the smoke test's size")
    args = parser.parse_args(argv)
    size = SIZES["full" if args.full else "tiny" if args.tiny else "default"]
    found = backends()
    results: list[Result] = []
    for backend in found:
        results += run_backend(backend, size, not args.json)
    skipped = [] if "postgresql" in found else [f"postgresql skipped: {PG_ENV} not set"]
    if args.json:
        print(json.dumps({"size": size.name, "skipped": skipped,
                          "results": [r.as_dict() for r in results]}, indent=2))
    else:
        print(table(results))
        for line in skipped:
            print(line)
    return 0


if __name__ == "__main__":
    sys.exit(main())
