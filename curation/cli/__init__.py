"""The `curation` command group: thin commands, each owning one transaction.

The database comes from `--db URL` (on the command, else on the group), else
CURATION_DATABASE_URL, else the default SQLite file in the data folder. User errors print
a message and exit with status 2; `ledger verify` exits 1 when the ledger is broken.
"""

from __future__ import annotations

import json
from datetime import datetime
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import click
from sqlalchemy import Engine, and_, func, inspect, select
from sqlalchemy.engine import make_url
from sqlalchemy.exc import ArgumentError, OperationalError
from sqlalchemy.orm import Session, aliased

from curation import config, demo_data, ledger
from curation.db import (
    alembic_config,
    current_revision,
    downgrade_to,
    make_engine,
    make_sessionmaker,
    upgrade_to_head,
)
from curation.errors import CurationError, InvalidInput, NotADemoDatabase
from curation.model import Derivation, Item, ItemKind, LedgerEntry

DEFAULT_HOST, DEFAULT_PORT = "127.0.0.1", 5000
#: alembic's own bookkeeping table: a database holding only it is still empty
ALEMBIC_TABLE = "alembic_version"


class CommandError(click.ClickException):
    """A user error: the message on stderr, exit status 2, no traceback."""

    exit_code = 2


class CurationGroup(click.Group):
    """A command group that turns the application's own errors into CommandError."""

    def invoke(self, ctx: click.Context) -> Any:
        try:
            return super().invoke(ctx)
        except CurationError as exc:
            raise CommandError(str(exc)) from exc


def db_option(help_text: str = "SQLAlchemy URL of the database (default: "
              "CURATION_DATABASE_URL, else curation.db in the data folder).") -> Callable[..., Any]:
    """The --db option every command and group accepts."""
    return click.option("--db", "db_url", metavar="URL", default=None, help=help_text)


def server_options(f: Callable[..., Any]) -> Callable[..., Any]:
    """--host and --port for the commands that serve the web application."""
    f = click.option("--port", default=DEFAULT_PORT, show_default=True, type=int,
                     help="TCP port to listen on.")(f)
    return click.option("--host", default=DEFAULT_HOST, show_default=True,
                        help="Interface to listen on (0.0.0.0 for every interface).")(f)


def resolve_url(ctx: click.Context, own: str | None, default: Callable[[], str]) -> str:
    """The command's --db, else the nearest group's --db, else `default()`."""
    if own:
        return own
    parent = ctx.parent
    while parent is not None:
        if parent.params.get("db_url"):
            return str(parent.params["db_url"])
        parent = parent.parent
    return default()


def safe_url(url: str) -> str:
    """The URL with its password hidden, for messages."""
    try:
        return make_url(url).render_as_string(hide_password=True)
    except ArgumentError:
        return url


def _sqlite_file(url: str) -> Path | None:
    parsed = make_url(url)
    if parsed.get_backend_name() != "sqlite" or parsed.database in (None, "", ":memory:"):
        return None
    return Path(parsed.database)


def open_engine(url: str, *, create: bool = False) -> Engine:
    """An engine on a database that answers; refuses a missing SQLite file unless `create`."""
    try:
        path = _sqlite_file(url)
        if path is not None and not create and not path.exists():
            raise CommandError(f"no database at {safe_url(url)}: run `curation init` first")
        engine = make_engine(url)
    except ArgumentError as exc:
        raise CommandError(f"not a usable database URL: {safe_url(url)} ({exc})") from exc
    try:
        with engine.connect():
            pass
    except OperationalError as exc:
        engine.dispose()
        raise CommandError(f"cannot open the database {safe_url(url)}: {exc.orig}") from exc
    return engine


@contextmanager
def engine_for(url: str, *, create: bool = False) -> Iterator[Engine]:
    """An engine for the length of a command, disposed afterwards."""
    engine = open_engine(url, create=create)
    try:
        yield engine
    finally:
        engine.dispose()


@contextmanager
def transaction(engine: Engine) -> Iterator[Session]:
    """One session, committed once at the end, rolled back on any error."""
    with make_sessionmaker(engine)() as session:
        try:
            yield session
            session.commit()
        except BaseException:
            session.rollback()
            raise


def head_revision() -> str | None:
    """The newest migration the code knows."""
    from alembic.script import ScriptDirectory

    return ScriptDirectory.from_config(alembic_config()).get_current_head()


def require_head(engine: Engine, url: str) -> None:
    """Refuse a database that is not migrated to the newest revision."""
    current, head = current_revision(engine), head_revision()
    if current != head:
        state = "not initialised" if current is None else f"at revision {current}, not {head}"
        raise CommandError(f"the database {safe_url(url)} is {state}: run `curation init` first")


@contextmanager
def command_session(ctx: click.Context, db_url: str | None) -> Iterator[Session]:
    """One session on the command's database (migrated to head), committed once at the end."""
    url = resolve_url(ctx, db_url, config.database_url)
    with engine_for(url) as engine:
        require_head(engine, url)
        with transaction(engine) as session:
            yield session


def parse_moment(option: str, text: str) -> datetime:
    """An ISO 8601 timestamp with its UTC offset, or an error naming the option."""
    try:
        moment = datetime.fromisoformat(text)
    except ValueError:
        raise InvalidInput(option, text, "an ISO 8601 timestamp with its UTC offset") from None
    if moment.tzinfo is None:
        raise InvalidInput(option, text, "a timestamp with its UTC offset, e.g. +01:00")
    return moment


@click.group(cls=CurationGroup)
@db_option()
def main(db_url: str | None) -> None:
    """curation: provenance of returned particles and everything cut from them."""


@main.command()
@db_option()
@click.pass_context
def init(ctx: click.Context, db_url: str | None) -> None:
    """Create the database, or migrate it to the newest schema."""
    url = resolve_url(ctx, db_url, config.database_url)
    with engine_for(url, create=True) as engine:
        upgrade_to_head(engine)
        click.echo(f"{safe_url(url)} is at revision {current_revision(engine)} (head)")


@main.command()
@db_option()
@server_options
@click.pass_context
def serve(ctx: click.Context, db_url: str | None, host: str, port: int) -> None:
    """Serve the web application with waitress (http://127.0.0.1:5000 by default)."""
    url = resolve_url(ctx, db_url, config.database_url)
    with engine_for(url) as engine:
        require_head(engine, url)
        from curation.cli.users import ensure_admin

        ensure_admin(engine)
    run_server(url, host, port)


def run_server(url: str, host: str, port: int) -> None:
    """Build the Flask application on `url` and serve it until interrupted."""
    import waitress  # type: ignore[import-untyped]

    import curation
    from curation.web.app import settle_for_serving

    app = curation.create_app({"DATABASE_URL": url})
    settle_for_serving()
    click.echo(f"Serving {safe_url(url)} at {site_url(host, port)} (Ctrl+C to stop)")
    waitress.serve(app, host=host, port=port)


def site_url(host: str, port: int) -> str:
    """The address to open in a browser."""
    return f"http://[{host}]:{port}/" if ":" in host else f"http://{host}:{port}/"


@main.command()
@db_option("Database to build the demo in (default: CURATION_DATABASE_URL, else demo.db in "
           "the data folder; never a database with real records).")
@click.option("--no-serve", is_flag=True,
              help="Only build the demo database and print its summary.")
@server_options
@click.pass_context
def demo(ctx: click.Context, db_url: str | None, no_serve: bool, host: str, port: int) -> None:
    """Build the invented demo scenario in its own database, then serve it."""
    url = resolve_url(ctx, db_url, config.demo_database_url)
    summary = build_demo(url)
    click.echo(describe_demo(url, summary))
    if not no_serve:
        click.echo(f"\nOpen {site_url(host, port)}")
        run_server(url, host, port)


def database_contents(engine: Engine) -> tuple[str, str | None]:
    """("empty" | "demo" | "other", actor of the first ledger entry)."""
    tables = set(inspect(engine).get_table_names()) - {ALEMBIC_TABLE}
    if not tables:
        return "empty", None
    if LedgerEntry.__tablename__ not in tables:
        return "other", None
    with engine.connect() as conn:
        first = conn.scalar(select(LedgerEntry.actor).order_by(LedgerEntry.seq).limit(1))
    if first is None:
        return "empty", None
    return ("demo" if first == demo_data.DEMO_ACTOR else "other"), first


def wipe_demo(engine: Engine, url: str) -> Engine:
    """Empty an earlier demo database: delete an SQLite file, downgrade anything else."""
    path = _sqlite_file(url)
    if path is None:
        downgrade_to(engine, "base")
        return engine
    engine.dispose()
    for name in (path.name, path.name + "-wal", path.name + "-shm"):
        (path.parent / name).unlink(missing_ok=True)
    return open_engine(url, create=True)


def build_demo(url: str) -> demo_data.DemoSummary:
    """Build the demo into `url`, rebuilding an earlier demo; refuse any other database."""
    engine = open_engine(url, create=True)
    try:
        contents, actor = database_contents(engine)
        if contents == "other":
            found = f"its first ledger entry is by {actor!r}" if actor else "it holds other tables"
            raise NotADemoDatabase(
                f"{safe_url(url)} is not a demo database ({found}); `curation demo` only "
                f"builds into an empty database or rebuilds its own. Nothing was changed.")
        if contents == "demo":
            engine = wipe_demo(engine, url)
        upgrade_to_head(engine)
        with transaction(engine) as session:
            return demo_data.build(session)
    finally:
        engine.dispose()


def _counts(counts: dict[str, int]) -> str:
    return f"{sum(counts.values())} (" + ", ".join(f"{k} {n}" for k, n in counts.items()) + ")"


def describe_demo(url: str, summary: demo_data.DemoSummary) -> str:
    """The demo summary for humans: counts, corrections and the planted problems."""
    lines = [
        f"Demo database: {safe_url(url)}",
        f"Scenario: {summary.mission}, {summary.body} (invented)",
        f"Items: {_counts(summary.items_by_kind)}",
        f"Events: {_counts(summary.events_by_kind)}",
        f"People: {summary.people}",
        f"Ledger entries: {summary.ledger_entries}",
    ]
    lines += [f"Correction: event {old} superseded by event {new}"
              for old, new in summary.corrections]
    lines.append("Planted problems for the audits:")
    for p in summary.problems:
        ids = ", ".join(str(i) for i in p.event_ids)
        lines.append(f"  {p.code}  {p.item_code}  (events {ids}): {p.description}")
    return "\n".join(lines)


def list_items(session: Session, kind: str | None = None) -> list[dict[str, Any]]:
    """Every item (or every item of `kind`) with its first parent's code, in one query."""
    first = select(
        Derivation.child_id, Derivation.parent_id,
        func.row_number().over(partition_by=Derivation.child_id,
                               order_by=(Derivation.derived_at, Derivation.id)).label("rank"),
    ).subquery("first_parent")
    parent = aliased(Item, name="parent")
    stmt = (
        select(Item, parent.code)
        .outerjoin(first, and_(first.c.child_id == Item.id, first.c.rank == 1))
        .outerjoin(parent, parent.id == first.c.parent_id)
        .order_by(Item.code)
    )
    if kind is not None:
        stmt = stmt.where(Item.kind == kind)
    return [
        {"code": item.code, "kind": item.kind, "status": item.status, "material": item.material,
         "parent": parent_code, "is_pristine": item.is_pristine, "mass_ug": item.mass_ug,
         "mass_method": item.mass_method, "created_at": item.created_at.isoformat()}
        for item, parent_code in session.execute(stmt)
    ]


def format_table(rows: list[dict[str, Any]], columns: tuple[str, ...], width: int = 48) -> str:
    """A plain text table; long cells are cut to `width` characters."""
    def cell(value: Any) -> str:
        text = "-" if value is None or value == "" else str(value)
        return text if len(text) <= width else text[: width - 1] + "…"

    cells = [[cell(r[c]) for c in columns] for r in rows]
    widths = [max([len(c)] + [len(row[i]) for row in cells]) for i, c in enumerate(columns)]
    lines = ["  ".join(c.ljust(w) for c, w in zip(columns, widths)).rstrip()]
    lines += ["  ".join(v.ljust(w) for v, w in zip(row, widths)).rstrip() for row in cells]
    return "\n".join(lines)


@main.command("items")
@db_option()
@click.option("--json", "as_json", is_flag=True, help="Print a JSON list instead of a table.")
@click.option("--kind", type=click.Choice([k.value for k in ItemKind]),
              help="Only items of this kind.")
@click.pass_context
def items_command(ctx: click.Context, db_url: str | None, as_json: bool, kind: str | None) -> None:
    """List items with their kind, status, material and parent."""
    url = resolve_url(ctx, db_url, config.database_url)
    with engine_for(url) as engine:
        require_head(engine, url)
        with transaction(engine) as session:
            rows = list_items(session, kind)
    if as_json:
        click.echo(json.dumps(rows, indent=2, ensure_ascii=False))
    elif rows:
        click.echo(format_table(rows, ("code", "kind", "status", "material", "parent")))
    else:
        click.echo("No items.")


@main.group("ledger")
@db_option()
def ledger_group(db_url: str | None) -> None:
    """Check the hash-chained ledger of every write."""


@ledger_group.command("verify")
@db_option()
@click.option("--json", "as_json", is_flag=True, help="Print the result as a JSON object.")
@click.pass_context
def ledger_verify(ctx: click.Context, db_url: str | None, as_json: bool) -> None:
    """Recompute the hash chain and compare every row with its last ledger state.

    Exit status 0 when the ledger is intact, 1 when it is not.
    """
    url = resolve_url(ctx, db_url, config.database_url)
    with engine_for(url) as engine:
        require_head(engine, url)
        with transaction(engine) as session:
            result = ledger.verify(session)
    click.echo(verification_json(result) if as_json else describe_verification(url, result))
    ctx.exit(0 if result.ok else 1)


def verification_json(result: ledger.Verification) -> str:
    """The verification as a JSON object."""
    return json.dumps({
        "ok": result.ok, "entries": result.entries, "rows": result.rows,
        "first_broken_seq": result.first_broken_seq,
        "problems": [{"code": p.code, "message": p.message, "seq": p.seq, "table": p.table,
                      "row": p.row} for p in result.problems],
    }, indent=2)


def describe_verification(url: str, result: ledger.Verification) -> str:
    """The verification for humans."""
    counts = f"{result.entries} entries checked, {result.rows} rows compared."
    lines = [f"Ledger of {safe_url(url)}: {counts}"]
    if result.ok:
        lines.append("OK: the hash chain is intact and every row matches its last ledger state.")
        return "\n".join(lines)
    lines.append(f"BROKEN: {len(result.problems)} problem(s).")
    lines += [f"  {p.code}: {p.message}" for p in result.problems]
    first = result.first_broken_seq
    lines.append(f"First broken entry: {first}" if first is not None else
                 "First broken entry: none (the chain holds; rows differ from it)")
    return "\n".join(lines)


# Commands kept in their own modules register themselves on `main` when imported.
from curation.cli import audit as _audit  # noqa: E402,F401
from curation.cli import files as _files, labels as _labels, tokens as _tokens  # noqa: E402,F401,I001
from curation.cli import reports as _reports  # noqa: E402,F401
from curation.cli import bench as _bench, imports as _imports  # noqa: E402,F401,I001
from curation.cli import controls as _controls  # noqa: E402,F401
from curation.cli import backup as _backup  # noqa: E402,F401
from curation.cli import exchange as _exchange  # noqa: E402,F401
from curation.cli import allocations as _allocations  # noqa: E402,F401
from curation.cli import users as _users  # noqa: E402,F401

if __name__ == "__main__":
    main()
