"""`curation backup` and `curation restore`: a consistent copy, and putting it back."""

from __future__ import annotations

import subprocess
from pathlib import Path

import click
from sqlalchemy import select

from curation import config, db, ledger
from curation.cli import (
    CommandError, db_option, engine_for, main, require_head, resolve_url, safe_url, transaction,
)
from curation.model import LedgerEntry


def _head(url: str) -> tuple[int, str, bool]:
    """The ledger's last entry (seq, hash) and whether the whole ledger verifies."""
    with engine_for(url) as engine:
        require_head(engine, url)
        with transaction(engine) as session:
            last = session.execute(select(LedgerEntry.seq, LedgerEntry.hash)
                                   .order_by(LedgerEntry.seq.desc()).limit(1)).first()
            ok = ledger.verify(session).ok
    return (last.seq, last.hash, ok) if last else (0, ledger.GENESIS_HASH, ok)


def _run(what: str, action) -> None:  # type: ignore[no-untyped-def]
    try:
        action()
    except subprocess.CalledProcessError as exc:
        raise CommandError(f"{what} failed: {exc.stderr.decode(errors='replace').strip()}") from exc
    except FileNotFoundError as exc:
        raise CommandError(f"{what} needs {exc.filename}, which is not installed") from exc


@main.command("backup")
@db_option()
@click.option("-o", "--output", required=True, type=click.Path(dir_okay=False, path_type=Path),
              help="The backup file to write (must not exist yet).")
@click.pass_context
def backup_command(ctx: click.Context, db_url: str | None, output: Path) -> None:
    """Write a consistent copy of the database while it stays in use.

    SQLite: the online backup API; PostgreSQL: pg_dump's custom format. The ledger head of the
    copy is printed: a restore must end at the same head.
    """
    url = resolve_url(ctx, db_url, config.database_url)
    if output.exists():
        raise CommandError(f"{output} exists already; choose a new file name")
    seq, digest, ok = _head(url)
    _run("the backup", lambda: db.backup(url, output))
    click.echo(f"Backed up {safe_url(url)} to {output}: ledger head {seq} {digest[:16]}…"
               + ("" if ok else " (NOTE: the ledger did not verify before the backup)"))


@main.command("restore")
@db_option()
@click.argument("backup_file", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@click.option("--yes", is_flag=True, help="Replace the database without asking.")
@click.pass_context
def restore_command(ctx: click.Context, db_url: str | None, backup_file: Path, yes: bool) -> None:
    """Replace the database with BACKUP_FILE, then verify the restored ledger.

    Exit status 1 when the restored ledger does not verify.
    """
    url = resolve_url(ctx, db_url, config.database_url)
    if not yes:
        click.confirm(f"Replace everything in {safe_url(url)} with {backup_file}?", abort=True)
    _run("the restore", lambda: db.restore(backup_file, url))
    seq, digest, ok = _head(url)
    click.echo(f"Restored {backup_file} into {safe_url(url)}: ledger head {seq} {digest[:16]}…, "
               + ("the ledger verifies" if ok else "the ledger does NOT verify"))
    ctx.exit(0 if ok else 1)
