"""`curation import events FILE`: events in bulk from CSV or JSON lines, all or nothing."""

from __future__ import annotations

import json
from pathlib import Path

import click

from curation.cli import CommandError, command_session, db_option, main
from curation.services import imports
from curation.services.common import person_by_username


@main.group("import")
@db_option()
def import_group(db_url: str | None) -> None:
    """Bring records in from files, all or nothing."""


@import_group.command("events")
@db_option()
@click.argument("file", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@click.option("--actor", required=True, metavar="USERNAME",
              help="Who the import is recorded as, and the operator of rows without one.")
@click.option("--format", "fmt", type=click.Choice(["csv", "jsonl"]), default=None,
              help="File format (default: from the suffix; .csv is CSV, anything else JSON lines).")
@click.option("--confirm-warnings", is_flag=True,
              help="Accept step parameters outside their typical range.")
@click.option("--json", "as_json", is_flag=True, help="Print the result as a JSON object.")
@click.pass_context
def import_events_command(ctx: click.Context, db_url: str | None, file: Path, actor: str,
                          fmt: str | None, confirm_warnings: bool, as_json: bool) -> None:
    """Import events from FILE (columns: item, kind, occurred_at with its UTC offset, and
    ended_at, operator, technique, action, environment, summary, details as JSON).

    Every row is checked as if it were recorded by hand; one bad row and nothing is written,
    each bad row named by its line. Exit status 2 when the file is refused.
    """
    fmt = fmt or ("csv" if file.suffix.lower() == ".csv" else "jsonl")
    rows = imports.read_rows(file.read_text(encoding="utf-8-sig"), fmt)
    try:
        with command_session(ctx, db_url) as session:
            done = imports.import_events(session, actor=person_by_username(session, actor),
                                         rows=rows, confirm_warnings=confirm_warnings)
    except imports.ImportRejected as exc:
        lines = [f"line {n}: {message}" for n, message in exc.problems]
        raise CommandError(f"{file}: {len(lines)} bad row(s), nothing imported:\n"
                           + "\n".join(lines)) from exc
    if as_json:
        click.echo(json.dumps({"events": done.events, "by_kind": done.by_kind}))
    else:
        kinds = ", ".join(f"{k} {n}" for k, n in sorted(done.by_kind.items()))
        click.echo(f"Imported {done.events} event(s) from {file}" + (f" ({kinds})" if kinds else ""))
