"""`curation label`: a sheet of QR labels for items, as PNG or PDF."""

from __future__ import annotations

from pathlib import Path

import click

from curation.cli import command_session, db_option, main
from curation.reports import labels


@main.command("label")
@db_option()
@click.argument("codes", nargs=-1, required=True)
@click.option("-o", "--output", required=True, type=click.Path(dir_okay=False, path_type=Path),
              help="File to write: a .png sheet (one image) or a .pdf sheet (A4 pages).")
@click.pass_context
def label_command(ctx: click.Context, db_url: str | None, codes: tuple[str, ...],
                  output: Path) -> None:
    """Print labels (QR code, code and a short line) for the items CODE..."""
    with command_session(ctx, db_url) as session:
        sheet = labels.labels_for(session, list(codes))
    labels.write_sheet(sheet, output)
    click.echo(f"{len(sheet)} label(s) written to {output}")
