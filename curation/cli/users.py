"""`curation user`: logins for the web application (passwords printed once, stored hashed)."""

from __future__ import annotations

import getpass
import json

import click
from sqlalchemy import Engine

from curation.cli import command_session, db_option, main, transaction
from curation.services import accounts
from curation.services.common import person_by_username, station_by_code

#: the administrator the first `curation serve` of a database without one creates
FIRST_ADMIN = "admin"


def _actor() -> str:
    """Who a user command is recorded as in the ledger."""
    return f"cli:{getpass.getuser()}"


@main.group("user")
@db_option()
def user_group(db_url: str | None) -> None:
    """Logins: add, disable, reset a password."""


@user_group.command("add")
@db_option()
@click.argument("username")
@click.option("--name", required=True, help="The person's full name.")
@click.option("--role", required=True, type=click.Choice(accounts.ROLES),
              help="What the login may do (admin, curator, analyst, station, auditor).")
@click.option("--station", default=None, help="Station code (required for --role station).")
@click.option("--json", "as_json", is_flag=True, help="Print the account and password as JSON.")
@click.pass_context
def add_command(ctx: click.Context, db_url: str | None, username: str, name: str, role: str,
                station: str | None, as_json: bool) -> None:
    """Open a login for a new person and print its random password once."""
    with command_session(ctx, db_url) as session:
        _, password = accounts.create_account(
            session, actor=_actor(), username=username, name=name, role=role,
            station=station_by_code(session, station) if station else None)
    _show(username, role, password, as_json)


@user_group.command("disable")
@db_option()
@click.argument("username")
@click.pass_context
def disable_command(ctx: click.Context, db_url: str | None, username: str) -> None:
    """Close USERNAME's login; their records stay theirs."""
    with command_session(ctx, db_url) as session:
        accounts.disable(session, actor=_actor(), person=person_by_username(session, username))
    click.echo(f"Login of {username} disabled.")


@user_group.command("reset")
@db_option()
@click.argument("username")
@click.option("--json", "as_json", is_flag=True, help="Print the account and password as JSON.")
@click.pass_context
def reset_command(ctx: click.Context, db_url: str | None, username: str, as_json: bool) -> None:
    """Give USERNAME a new random password (printed once) and open the login again."""
    with command_session(ctx, db_url) as session:
        person = person_by_username(session, username)
        password = accounts.reset(session, actor=_actor(), person=person)
        role = str(person.role)
    _show(username, role, password, as_json)


def _show(username: str, role: str, password: str, as_json: bool) -> None:
    if as_json:
        click.echo(json.dumps({"username": username, "role": role, "password": password}))
        return
    click.echo(f"Login {username} ({role}); password (copy it now, it is not shown again):")
    click.echo(password)


def ensure_admin(engine: Engine) -> None:
    """On a database without an administrator, create one and print its password once."""
    with transaction(engine) as session:
        if accounts.has_admin(session):
            return
        _, password = accounts.create_account(session, actor="system:first-start",
                                              username=FIRST_ADMIN, name="Administrator",
                                              role="admin")
    click.echo(f"No administrator yet: created login {FIRST_ADMIN!r} with password (shown once):")
    click.echo(password)
