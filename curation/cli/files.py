"""`curation files verify`: re-hash every registered data file; name the missing and changed."""

from __future__ import annotations

import json
from typing import Any

import click

from curation.cli import command_session, db_option, main
from curation.services import files


def check_dict(check: files.FileCheck) -> dict[str, Any]:
    """One file's check as plain JSON values."""
    df = check.data_file
    return {"id": df.id, "item": df.item.code, "path": df.path, "name": df.original_name,
            "status": check.status, "sha256": df.sha256, "sha256_now": check.sha256_now,
            "size_bytes": df.size_bytes, "size_now": check.size_now}


@main.group("files")
@db_option()
def files_group(db_url: str | None) -> None:
    """Data files registered for items."""


@files_group.command("verify")
@db_option()
@click.option("--json", "as_json", is_flag=True, help="Print the result as a JSON object.")
@click.pass_context
def verify_command(ctx: click.Context, db_url: str | None, as_json: bool) -> None:
    """Re-hash every registered file; exit status 1 when any is missing or changed."""
    with command_session(ctx, db_url) as session:
        rows = [check_dict(c) for c in files.verify(session)]
    bad = [r for r in rows if r["status"] != "ok"]
    if as_json:
        click.echo(json.dumps({"ok": not bad, "checked": len(rows), "missing": [
            r for r in bad if r["status"] == "missing"], "changed": [
            r for r in bad if r["status"] == "changed"]}, indent=2, ensure_ascii=False))
    else:
        click.echo(describe(rows, bad))
    ctx.exit(1 if bad else 0)


def describe(rows: list[dict[str, Any]], bad: list[dict[str, Any]]) -> str:
    """The check for humans: one line per missing or changed file."""
    lines = [f"{r['status'].upper():8} {r['item']:16} {r['path']}" + (
        f" (SHA-256 now {r['sha256_now'][:16]}…, was {r['sha256'][:16]}…)"
        if r["status"] == "changed" else "") for r in bad]
    lines.append(f"{len(rows)} file(s) checked: {len(rows) - len(bad)} unchanged, "
                 f"{sum(r['status'] == 'missing' for r in bad)} missing, "
                 f"{sum(r['status'] == 'changed' for r in bad)} changed.")
    return "\n".join(lines)
