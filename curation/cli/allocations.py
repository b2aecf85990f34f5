"""`curation allocations` (what is due) and `curation report allocation` (the report)."""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path

import click

from curation.cli import CommandError, command_session, db_option, main
from curation.cli.reports import _write, report_group
from curation.reports import allocation, allocation_pdf, allocation_tables
from curation.web.allocations import render_html

#: file suffix -> how the allocation report is written
FORMATS: dict[str, Callable[[allocation.AllocationReportData], bytes | str]] = {
    ".html": render_html,
    ".pdf": allocation_pdf.render,
    ".csv": allocation_tables.as_csv,
}


def dashboard_dict(row: allocation.DashboardRow) -> dict[str, object]:
    """One allocation's dues as plain JSON values."""
    a = row.allocation
    return {"reference": a.reference, "facility": a.facility, "laboratory": a.laboratory,
            "parent": a.parent.reference if a.parent else None, "issued": row.issued,
            "held": row.held, "balanced": row.balanced, "state": row.worst,
            "due": [{"what": d.what, "at": d.at.isoformat(), "state": d.state}
                    for d in row.dues]}


@main.command("allocations")
@db_option()
@click.option("--json", "as_json", is_flag=True, help="Print a JSON list instead of lines.")
@click.pass_context
def allocations_command(ctx: click.Context, db_url: str | None, as_json: bool) -> None:
    """List allocations with what is overdue and what falls due within 30 days."""
    with command_session(ctx, db_url) as session:
        rows = [dashboard_dict(r) for r in allocation.dashboard(session)]
    if as_json:
        click.echo(json.dumps(rows, indent=2, ensure_ascii=False))
        return
    for r in rows:
        balance = "balanced" if r["balanced"] else "NOT BALANCED"
        click.echo(f"{r['reference']:20} {str(r['state']).upper():9} {r['issued']} issued, "
                   f"{r['held']} held, {balance}")
        for d in r["due"]:  # type: ignore[attr-defined]
            click.echo(f"    {d['state']:9} {d['what']} ({d['at'][:10]})")
    if not rows:
        click.echo("No allocations.")


@report_group.command("allocation")
@db_option()
@click.argument("reference")
@click.option("-o", "--output", required=True, metavar="FILE",
              help="Where to write it; the suffix picks the format: .html, .pdf or .csv "
                   "(one file, a 'table' column first).")
@click.option("--period", type=int, metavar="ID",
              help="Only this reporting period (its number, as the allocation page lists it).")
@click.pass_context
def allocation_command(ctx: click.Context, db_url: str | None, reference: str, output: str,
                       period: int | None) -> None:
    """Write the allocation report of REFERENCE."""
    suffix = Path(output).suffix.lower()
    if suffix not in FORMATS:
        raise CommandError(f"unknown format {suffix or '(none)'}: use .html, .pdf or .csv")
    with command_session(ctx, db_url) as session:
        r = allocation.build(session, reference, period)
        body = FORMATS[suffix](r)
        unbalanced = sum(1 for a in r.accounts if not a.is_balanced)
    _write(body, output)
    click.echo(f"Wrote the allocation report of {reference} ({len(r.accounts)} issued "
               f"item(s), {unbalanced} not balanced) to {output}", err=True)
