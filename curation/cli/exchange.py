"""`curation export json` and `curation import json`: a whole database, and back."""

from __future__ import annotations

import json
from pathlib import Path

import click

from curation import exchange, ledger
from curation.cli import CommandError, command_session, db_option
from curation.cli.imports import import_group
from curation.cli.reports import _write, export_group


@export_group.command("json")
@db_option()
@click.option("-o", "--output", metavar="FILE", help="Write to FILE instead of standard output.")
@click.pass_context
def export_json_command(ctx: click.Context, db_url: str | None, output: str | None) -> None:
    """Write the whole database (every table, the ledger included) as one JSON document."""
    with command_session(ctx, db_url) as session:
        text = exchange.export_json(session)
    _write(text, output)


@import_group.command("json")
@db_option()
@click.argument("file", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@click.pass_context
def import_json_command(ctx: click.Context, db_url: str | None, file: Path) -> None:
    """Load a document written by `curation export json` into an empty database, then verify
    its ledger (exit 1 when it does not verify)."""
    try:
        document = json.loads(file.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise CommandError(f"{file} is not a JSON document: {exc}") from exc
    with command_session(ctx, db_url) as session:
        counts = exchange.import_document(session, document)
        result = ledger.verify(session)
    click.echo(f"Imported {sum(counts.values())} rows in {len(counts)} tables; the ledger "
               + ("verifies" if result.ok else f"does NOT verify: {result.problems[:3]}"))
    ctx.exit(0 if result.ok else 1)
