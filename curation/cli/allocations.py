"""`curation allocations` (what is due) and `curation report allocation` (the report)."""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path

import click

from curation.cli import CommandError, command_session, db_option, main, parse_moment
from curation.cli.reports import _write, report_group
from curation.reports import allocation, allocation_pdf, allocation_tables
from curation.services import allocations as writes
from curation.services.common import item_by_code, person_by_username
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


@main.group("allocations", invoke_without_command=True)
@db_option()
@click.option("--json", "as_json", is_flag=True, help="Print a JSON list instead of lines.")
@click.pass_context
def allocations_command(ctx: click.Context, db_url: str | None, as_json: bool) -> None:
    """List allocations with what is overdue and what falls due within 30 days
    (or, with a subcommand, record a loan and the items it issues)."""
    if ctx.invoked_subcommand is not None:
        return
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


@allocations_command.command("open")
@db_option()
@click.argument("reference")
@click.option("--facility", required=True, help="The lending facility.")
@click.option("--investigator", required=True, metavar="USERNAME",
              help="The investigator the loan is made to.")
@click.option("--starts", required=True, help="Start of the loan, ISO 8601 with UTC offset.")
@click.option("--report-due", help="When the first report is due (ISO 8601 with offset).")
@click.option("--expires", help="When the loan ends (ISO 8601 with offset).")
@click.option("--approving-body", default="", help="The body that approved the loan.")
@click.option("--laboratory", default="", help="The laboratory that holds it.")
@click.option("--conditions", default="", help="The conditions of the loan.")
@click.option("--as", "username", required=True, help="Username of who records it.")
@click.pass_context
def open_command(ctx: click.Context, db_url: str | None, reference: str, facility: str,
                 investigator: str, starts: str, report_due: str | None, expires: str | None,
                 approving_body: str, laboratory: str, conditions: str, username: str) -> None:
    """Record the loan REFERENCE agreed with a curation facility."""
    with command_session(ctx, db_url) as session:
        writes.open_allocation(
            session, actor=person_by_username(session, username), reference=reference,
            facility=facility, investigator=person_by_username(session, investigator),
            starts_at=parse_moment("--starts", starts),
            report_due_at=parse_moment("--report-due", report_due) if report_due else None,
            expires_at=parse_moment("--expires", expires) if expires else None,
            approving_body=approving_body, laboratory=laboratory, conditions=conditions)
    click.echo(f"Allocation {reference} recorded")


@allocations_command.command("issue")
@db_option()
@click.argument("reference")
@click.argument("codes", nargs=-1, required=True)
@click.option("--at", "at", required=True, help="When they were issued, ISO 8601 with offset.")
@click.option("--mass-ug", type=float, multiple=True,
              help="Allocated mass in micrograms, one per CODE in the same order.")
@click.option("--condition", default="", help="Condition on receipt.")
@click.option("--as", "username", required=True, help="Username of who records it.")
@click.pass_context
def issue_command(ctx: click.Context, db_url: str | None, reference: str, codes: tuple[str, ...],
                  at: str, mass_ug: tuple[float, ...], condition: str, username: str) -> None:
    """Record the items CODES issued under allocation REFERENCE."""
    if mass_ug and len(mass_ug) != len(codes):
        raise CommandError(f"--mass-ug given {len(mass_ug)} time(s) for {len(codes)} code(s)")
    masses = list(mass_ug) or [None] * len(codes)
    with command_session(ctx, db_url) as session:
        loan = writes.allocation_by_reference(session, reference)
        actor = person_by_username(session, username)
        for code, mass in zip(codes, masses):
            writes.issue_item(session, actor=actor, allocation=loan,
                              item=item_by_code(session, code), issued_at=parse_moment("--at", at),
                              allocated_mass_ug=mass, condition_on_receipt=condition)
    click.echo(f"Issued {len(codes)} item(s) under {reference}")
