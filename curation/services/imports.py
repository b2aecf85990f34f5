"""Import events in bulk from CSV or JSON lines: every row checked, all written or none.

Each row goes through the same checks as one recorded by hand (event kind, timezone-aware
times, a step's technique and parameters through `curation.techniques`, a custody action or
a handling environment from the services' lists); every bad row is named with its line.
Good files are written in one transaction with Core inserts and `ledger.append_rows`, not
a unit of work per row, so a hundred thousand events take seconds, not minutes.
"""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Iterable, Iterator, Mapping
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import ledger, techniques
from curation.db import utcnow
from curation.errors import CurationError, InvalidInput
from curation.model import Event, EventKind, Item, Person
from curation.services.common import aware, one_of
from curation.services.custody import CustodyAction, Environment
from curation.services.events import dose_columns

#: columns a file may hold; item, kind and occurred_at are required
COLUMNS = ("item", "kind", "occurred_at", "ended_at", "operator", "technique", "action",
           "environment", "summary", "details")
#: rows written per statement
CHUNK = 5000
#: codes looked up per query
LOOKUP_CHUNK = 900


class ImportRejected(CurationError):
    """The file had bad rows; nothing was written. `problems` holds (line, message)."""

    def __init__(self, problems: list[tuple[int, str]]) -> None:
        self.problems = problems
        shown = "; ".join(f"line {n}: {m}" for n, m in problems[:20])
        more = f" (and {len(problems) - 20} more)" if len(problems) > 20 else ""
        super().__init__(f"{len(problems)} bad row(s), nothing imported: {shown}{more}")


@dataclass
class Imported:
    """What an import wrote."""

    events: int = 0
    by_kind: dict[str, int] = field(default_factory=dict)


def read_rows(text: str, fmt: str) -> Iterator[tuple[int, dict[str, Any]]]:
    """(line number, row) from CSV (header on line 1) or JSON lines; blank lines skipped."""
    if fmt == "csv":
        reader = csv.DictReader(io.StringIO(text))
        for row in reader:
            yield reader.line_num, {k: v for k, v in row.items() if k is not None}
        return
    for number, line in enumerate(text.splitlines(), start=1):
        if line.strip():
            try:
                row = json.loads(line)
            except json.JSONDecodeError as exc:
                yield number, {"__error__": f"not JSON ({exc.msg})"}
                continue
            yield number, row if isinstance(row, dict) else {"__error__": "not a JSON object"}


def _when(name: str, raw: Any, required: bool) -> datetime | None:
    if raw is None or raw == "":
        if required:
            raise InvalidInput(name, raw, "an ISO 8601 time with its UTC offset")
        return None
    try:
        value = datetime.fromisoformat(str(raw).strip())
    except ValueError:
        raise InvalidInput(name, raw, "an ISO 8601 time with its UTC offset") from None
    return aware(name, value)


def _details(raw: Any) -> dict[str, Any]:
    if raw is None or raw == "":
        return {}
    if isinstance(raw, str):
        try:
            raw = json.loads(raw)
        except json.JSONDecodeError:
            raise InvalidInput("details", raw[:40], "a JSON object") from None
    if not isinstance(raw, dict):
        raise InvalidInput("details", raw, "a JSON object")
    return raw


def _by_kind(kind: str, row: Mapping[str, Any], details: dict[str, Any],
             confirm_warnings: bool) -> dict[str, Any]:
    """The columns a kind needs, checked as the services check them."""
    if kind == EventKind.STEP.value:
        spec = techniques.get(str(row.get("technique") or ""))
        validated = techniques.validate(spec.code, details)
        if validated.warnings and not confirm_warnings:
            raise InvalidInput("details", "", "values in the typical range (or confirm): "
                               + "; ".join(w.message for w in validated.warnings))
        return {"technique": spec.code, "is_destructive": spec.is_destructive,
                "details": dict(validated.values),
                **dose_columns(techniques.dose_for(spec, validated.values))}
    if kind == EventKind.CUSTODY.value:
        return {"action": one_of("action", row.get("action"), [a.value for a in CustodyAction]),
                "details": details}
    if kind == EventKind.HANDLING.value:
        env = one_of("environment", row.get("environment"), [e.value for e in Environment])
        return {"environment": env, "details": details}
    action = str(row.get("action") or "").strip()
    if not action:
        raise InvalidInput("action", action, "what was read (the indicator or quantity)")
    return {"action": action, "details": details}


def check_row(row: Mapping[str, Any], confirm_warnings: bool = False) -> dict[str, Any]:
    """One row as event columns (item and operator still codes); InvalidInput when bad."""
    if "__error__" in row:
        raise InvalidInput("row", "", str(row["__error__"]))
    unknown = sorted(set(row) - set(COLUMNS))
    if unknown:
        raise InvalidInput("columns", unknown, "only " + ", ".join(COLUMNS))
    if not str(row.get("item") or "").strip():
        raise InvalidInput("item", row.get("item"), "an item code")
    kind = one_of("kind", row.get("kind"), [k.value for k in EventKind])
    occurred = _when("occurred_at", row.get("occurred_at"), True)
    ended = _when("ended_at", row.get("ended_at"), False)
    if ended is not None and occurred is not None and ended < occurred:
        raise InvalidInput("ended_at", ended.isoformat(), "at or after occurred_at")
    columns = _by_kind(kind, row, _details(row.get("details")), confirm_warnings)
    return {"item": str(row["item"]).strip(), "operator": str(row.get("operator") or "").strip(),
            "kind": kind, "occurred_at": occurred, "ended_at": ended,
            "summary": str(row.get("summary") or "")[:300], **columns}


def _ids(session: Session, column: Any, key: Any, wanted: set[str]) -> dict[str, int]:
    """Ids by code (or username) for every wanted one that exists, a query per chunk."""
    found: dict[str, int] = {}
    names = sorted(wanted)
    for start in range(0, len(names), LOOKUP_CHUNK):
        part = names[start:start + LOOKUP_CHUNK]
        found.update((name, key_) for name, key_ in session.execute(
            select(column, key).where(column.in_(part))))
    return found


def _checked(rows: Iterable[tuple[int, Mapping[str, Any]]], confirm: bool
             ) -> tuple[list[tuple[int, dict[str, Any]]], list[tuple[int, str]]]:
    good, problems = [], []
    for number, row in rows:
        try:
            good.append((number, check_row(row, confirm)))
        except CurationError as exc:
            problems.append((number, str(exc)))
    return good, problems


def _resolve(session: Session, actor: Person, good: list[tuple[int, dict[str, Any]]],
             problems: list[tuple[int, str]]) -> None:
    """Replace codes by ids in place; a problem for each unknown code or username."""
    items = _ids(session, Item.code, Item.id, {r["item"] for _, r in good})
    people = _ids(session, Person.username, Person.id, {r["operator"] for _, r in good} - {""})
    for number, row in good:
        code, who = row.pop("item"), row.pop("operator")
        if code not in items:
            problems.append((number, f"item: no item with code {code!r}"))
        if who and who not in people:
            problems.append((number, f"operator: no person with username {who!r}"))
        row["item_id"], row["actor_id"] = items.get(code), people.get(who, actor.id)


def import_events(session: Session, *, actor: Person, rows: Iterable[tuple[int, Mapping[str, Any]]],
                  confirm_warnings: bool = False) -> Imported:
    """Check every row, then write them all (or raise ImportRejected and write nothing)."""
    ledger.attribute(session, actor)
    good, problems = _checked(rows, confirm_warnings)
    _resolve(session, actor, good, problems)
    if problems:
        raise ImportRejected(sorted(problems))
    session.flush()
    now, table, done = utcnow(), Event.__table__, Imported()
    for start in range(0, len(good), CHUNK):
        batch = [_full(table, row, now) for _, row in good[start:start + CHUNK]]
        ids = session.connection().execute(
            table.insert().returning(table.c.id, sort_by_parameter_order=True), batch).scalars()
        for row, row_id in zip(batch, ids):
            row["id"] = row_id
            done.by_kind[row["kind"]] = done.by_kind.get(row["kind"], 0) + 1
        ledger.append_rows(session, [(table, "insert", row) for row in batch])
        done.events += len(batch)
    return done


def _full(table: Any, row: dict[str, Any], now: datetime) -> dict[str, Any]:
    """Every column but the id: the row's values over the columns' defaults."""
    full = {"recorded_at": now, "details": {}, "summary": "", "note": "", "is_destructive": False,
            "is_dose_reported": False}
    for column in table.columns:
        if column.name != "id":
            full.setdefault(column.name, None)
    full.update(row)
    return full
