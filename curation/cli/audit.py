"""`curation audit`: every rule over the history, findings with their dispositions."""

from __future__ import annotations

import json
import sys
from collections.abc import Callable
from typing import Any

import click
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from curation import config
from curation.audit import engine
from curation.audit.findings import ERROR, Finding
from curation.cli import db_option, engine_for, main, require_head, resolve_url, transaction
from curation.model import Disposition, Item


def finding_dict(finding: Finding, disposition: Disposition | None) -> dict[str, Any]:
    """A finding and its latest disposition as plain JSON values."""
    return {
        "key": finding.key, "code": finding.code, "severity": finding.severity,
        "item": finding.item_code, "message": finding.message,
        "evidence": list(finding.evidence),
        "at": finding.at.isoformat() if finding.at else None,
        "disposition": None if disposition is None else {
            "decision": disposition.decision, "reason": disposition.reason,
            "by": disposition.actor.username, "at": disposition.recorded_at.isoformat(),
            "correction": disposition.correction_id},
    }


@main.command("audit")
@db_option()
@click.option("--json", "as_json", is_flag=True, help="Print the findings as a JSON object.")
@click.option("--item", "items", multiple=True, metavar="CODE",
              help="Only this item (repeat for several).")
@click.option("--study", metavar="NAME", help="Only the items of this study (its code).")
@click.pass_context
def audit_command(ctx: click.Context, db_url: str | None, as_json: bool,
                  items: tuple[str, ...], study: str | None) -> None:
    """Run every audit rule; exit status 1 when an open finding is an error."""
    url = resolve_url(ctx, db_url, config.database_url)
    with engine_for(url) as eng:
        require_head(eng, url)
        with transaction(eng) as session:
            found = list(engine.audit(session, item_codes=list(items) or None, study=study,
                                      progress=_progress(session)))
            decided = engine.dispositions(session, found)
            rows = [finding_dict(f, decided.get(f.key)) for f in found]
    open_errors = sum(1 for r in rows if r["severity"] == ERROR and r["disposition"] is None)
    if as_json:
        click.echo(json.dumps({"findings": rows, "open_errors": open_errors}, indent=2,
                              ensure_ascii=False))
    else:
        click.echo(describe(rows, open_errors))
    ctx.exit(1 if open_errors else 0)


def _watched() -> bool:
    """Standard error is a terminal (a person is watching, not a log file)."""
    return sys.stderr.isatty()


def _progress(session: Session) -> Callable[[int], None] | None:
    """Items audited so far on standard error, when a person is watching it."""
    if not _watched():
        return None
    total = session.scalar(select(func.count(Item.id))) or 0

    def say(done: int) -> None:
        click.echo(f"\raudited {done:,} item(s) of at most {total:,}", err=True,
                   nl=done >= total)
    return say


def describe(rows: list[dict[str, Any]], open_errors: int) -> str:
    """Findings for humans, one line each, dispositions beneath."""
    if not rows:
        return "No findings."
    lines = []
    for r in rows:
        state = "open" if r["disposition"] is None else r["disposition"]["decision"]
        evidence = ", ".join(f"#{e}" for e in r["evidence"]) or "-"
        lines.append(f"{r['severity'].upper():7} {r['code']:24} {r['item']:16} [{state}] "
                     f"{r['message']} (events {evidence})")
        if r["disposition"] is not None:
            lines.append(f"        {r['disposition']['by']}: {r['disposition']['reason']}")
    lines.append(f"{len(rows)} finding(s), {open_errors} open error(s).")
    return "\n".join(lines)
