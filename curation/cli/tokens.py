"""`curation token`: API tokens for a station's scripts (shown once, stored as SHA-256)."""

from __future__ import annotations

import getpass
import json

import click

from curation.cli import command_session, db_option, main
from curation.services import tokens
from curation.services.common import station_by_code


def _actor() -> str:
    """Who a token command is recorded as in the ledger."""
    return f"cli:{getpass.getuser()}"


@main.group("token")
@db_option()
def token_group(db_url: str | None) -> None:
    """API tokens for instrument-side scripts, one or more per station."""


@token_group.command("add")
@db_option()
@click.argument("station")
@click.option("--label", default="", help="What the token is for (e.g. the script's name).")
@click.pass_context
def add_command(ctx: click.Context, db_url: str | None, station: str, label: str) -> None:
    """Make a token for STATION (its code) and print it once: it is not stored."""
    with command_session(ctx, db_url) as session:
        made = tokens.create_token(session, actor=_actor(), station=station_by_code(
            session, station), label=label)
        token_id = made.row.id
    click.echo(f"Token {token_id} for station {station} (copy it now; it is not shown again):")
    click.echo(made.token)


@token_group.command("revoke")
@db_option()
@click.argument("token_id", type=int)
@click.pass_context
def revoke_command(ctx: click.Context, db_url: str | None, token_id: int) -> None:
    """Revoke the token with id TOKEN_ID; scripts using it are refused from now on."""
    with command_session(ctx, db_url) as session:
        row = tokens.revoke_token(session, actor=_actor(), token_id=token_id)
        station = row.station.code
    click.echo(f"Token {token_id} of station {station} revoked.")


@token_group.command("list")
@db_option()
@click.option("--json", "as_json", is_flag=True, help="Print a JSON list.")
@click.pass_context
def list_command(ctx: click.Context, db_url: str | None, as_json: bool) -> None:
    """List tokens (ids, stations, labels, when made and revoked), never the tokens."""
    with command_session(ctx, db_url) as session:
        rows = [{"id": t.id, "station": t.station.code, "label": t.label,
                 "created_at": t.created_at.isoformat(),
                 "revoked_at": t.revoked_at.isoformat() if t.revoked_at else None}
                for t in tokens.tokens_of(session)]
    if as_json:
        click.echo(json.dumps(rows, indent=2))
        return
    for r in rows:
        state = f"revoked {r['revoked_at']}" if r["revoked_at"] else "live"
        click.echo(f"{r['id']:>4}  {r['station']:16} {state:40} {r['label']}")
    if not rows:
        click.echo("No tokens.")
