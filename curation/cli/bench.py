"""`curation bench generate`: a synthetic mission-sized collection for the benchmarks."""

from __future__ import annotations

import json
import time

import click

from curation import config
from curation.cli import (
    CommandError,
    database_contents,
    db_option,
    engine_for,
    main,
    resolve_url,
    safe_url,
    transaction,
)
from curation.db import upgrade_to_head
from curation.services import generate


@main.group("bench")
@db_option()
def bench_group(db_url: str | None) -> None:
    """Synthetic data for the benchmarks in bench/ (never into a database with real records)."""


@bench_group.command("generate")
@db_option()
@click.option("--particles", type=click.IntRange(1), required=True,
              help="How many particles (about ten subsamples and nine events each).")
@click.option("--seed", type=int, default=0, show_default=True,
              help="Random seed: the same seed writes the same collection.")
@click.option("--large-family", type=click.IntRange(0), default=0, show_default=True,
              help="Descendants of the first particle (for the large-family benchmarks).")
@click.option("--json", "as_json", is_flag=True, help="Print the summary as a JSON object.")
@click.pass_context
def generate_command(ctx: click.Context, db_url: str | None, particles: int, seed: int,
                     large_family: int, as_json: bool) -> None:
    """Write a synthetic collection into an empty database (or one this command filled)."""
    url = resolve_url(ctx, db_url, config.database_url)
    with engine_for(url, create=True) as engine:
        contents, actor = database_contents(engine)
        if contents != "empty" and actor != generate.ACTOR:
            raise CommandError(f"{safe_url(url)} holds other records; generate into an empty "
                               "database. Nothing was changed.")
        upgrade_to_head(engine)
        started = time.perf_counter()
        with transaction(engine) as session:
            made = generate.generate(session, generate.Plan(
                particles=particles, seed=seed, large_family=large_family))
        seconds = time.perf_counter() - started
    summary = {"counts": made.counts, "large_family": made.large_family,
               "deep_needle": made.deep_needle, "station": made.station,
               "operator": made.operator, "seconds": round(seconds, 2)}
    if as_json:
        click.echo(json.dumps(summary))
    else:
        counts = ", ".join(f"{k} {n}" for k, n in made.counts.items() if n)
        click.echo(f"Wrote {counts} into {safe_url(url)} in {seconds:.1f} s")
        click.echo(f"Large family: {made.large_family}; depth-{generate.MAX_DEPTH} needle: "
                   f"{made.deep_needle}")
