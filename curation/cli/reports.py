"""`curation report lineage` and `curation export prov|datacite`: reports and exports."""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path

import click

from curation.cli import CommandError, command_session, db_option, main
from curation.reports import (
    controls, controls_pdf, datacite, lineage, lineage_pdf, lineage_tables, prov,
)
from curation.web.controls import render_html as controls_html
from curation.web.reports import render_html

#: file suffix -> how the lineage report is written
FORMATS: dict[str, Callable[[lineage.LineageReport], bytes | str]] = {
    ".pdf": lineage_pdf.render,
    ".csv": lineage_tables.as_csv,
    ".zip": lineage_tables.as_zip,
}


def _write(body: bytes | str, output: str | None) -> None:
    """To the file, or to standard output when there is none."""
    if output is None:
        click.echo(body if isinstance(body, str) else body.decode())
    elif isinstance(body, bytes):
        Path(output).write_bytes(body)
    else:
        Path(output).write_text(body, encoding="utf-8")


@main.group("report")
@db_option()
def report_group(db_url: str | None) -> None:
    """Reports for people: the per-particle lineage report, a study's controls report."""


@report_group.command("lineage")
@db_option()
@click.argument("code")
@click.option("-o", "--output", required=True, metavar="FILE",
              help="Where to write it; the suffix picks the format: .html, .pdf, .csv (one "
                   "file, a 'table' column first) or .zip (one CSV per table).")
@click.pass_context
def lineage_command(ctx: click.Context, db_url: str | None, code: str, output: str) -> None:
    """Write the lineage report of the particle CODE belongs to."""
    suffix = Path(output).suffix.lower()
    if suffix not in (*FORMATS, ".html"):
        raise CommandError(f"unknown format {suffix or '(none)'}: use .html, .pdf, .csv or .zip")
    with command_session(ctx, db_url) as session:
        report = lineage.build(session, code)
        body = render_html(report) if suffix == ".html" else FORMATS[suffix](report)
    _write(body, output)
    click.echo(f"Wrote the lineage report of {report.particle.code} "
               f"({len(report.tree)} items) to {output}", err=True)


@report_group.command("controls")
@db_option()
@click.argument("study")
@click.option("-o", "--output", required=True, metavar="FILE",
              help="Where to write it; the suffix picks the format: .html or .pdf.")
@click.option("--depth", default=controls.DEFAULT_DEPTH, show_default=True,
              type=click.IntRange(1, 4), help="How many shared exposures to follow from a "
                                              "failed control.")
@click.pass_context
def controls_command(ctx: click.Context, db_url: str | None, study: str, output: str,
                     depth: int) -> None:
    """Write the contamination-control report of STUDY (its code)."""
    suffix = Path(output).suffix.lower()
    if suffix not in (".html", ".pdf"):
        raise CommandError(f"unknown format {suffix or '(none)'}: use .html or .pdf")
    with command_session(ctx, db_url) as session:
        report = controls.controls_report(session, study, depth)
        body = controls_html(report, depth) if suffix == ".html" else controls_pdf.render(report)
    _write(body, output)
    at_risk = sum(len(f.at_risk) for f in report.failures)
    click.echo(f"Wrote the controls report of {study}: {len(report.failures)} failed "
               f"reading(s), {at_risk} item(s) at risk, to {output}", err=True)


@main.group("export")
@db_option()
def export_group(db_url: str | None) -> None:
    """Exports for archives and registries: W3C PROV, DataCite."""


@export_group.command("prov")
@db_option()
@click.argument("code")
@click.option("-o", "--output", metavar="FILE", help="Write to FILE instead of standard output.")
@click.pass_context
def prov_command(ctx: click.Context, db_url: str | None, code: str, output: str | None) -> None:
    """Write the lineage of CODE's particle as W3C PROV-JSON."""
    with command_session(ctx, db_url) as session:
        text = prov.export(session, code)
    _write(text, output)


@export_group.command("datacite")
@db_option()
@click.argument("code")
@click.option("-o", "--output", metavar="FILE", help="Write to FILE instead of standard output.")
@click.option("--publisher", metavar="NAME",
              help="Publisher to name (default: the lending facility or the laboratory).")
@click.pass_context
def datacite_command(ctx: click.Context, db_url: str | None, code: str, output: str | None,
                     publisher: str | None) -> None:
    """Write a DataCite 4.5 metadata record (JSON) for the sample CODE."""
    with command_session(ctx, db_url) as session:
        record = datacite.record(session, code, publisher)
    problems = datacite.format_problems(record)
    if problems:
        raise CommandError("; ".join(problems))
    _write(json.dumps(record, indent=2, ensure_ascii=False), output)
