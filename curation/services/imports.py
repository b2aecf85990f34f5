"""Import events in bulk from CSV or JSON lines: every row checked, all written or none.

Each row goes through the same checks as one recorded by hand (event kind, timezone-aware
times, a step's technique and parameters through `curation.techniques`, a custody action or
a handling environment from the services' lists); every bad row is named with its line.
Good files are written in one transaction with `ledger.insert_columns` (one executemany per
chunk, every row hashed into the ledger), not a unit of work per row. Parameters repeat from
row to row, so the technique checks of parameters already seen are remembered for the import.
"""

from __future__ import annotations

import csv
import gc
import io
import json
from collections import Counter
from collections.abc import Hashable, Iterable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import datetime
from itertools import repeat
from operator import itemgetter
from typing import Any

from sqlalchemy import Table, func, select, text
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
_KNOWN = frozenset(COLUMNS)
_KINDS = tuple(k.value for k in EventKind)
_STEP, _CUSTODY, _HANDLING = EventKind.STEP.value, EventKind.CUSTODY.value, EventKind.HANDLING.value
_ACTIONS = tuple(a.value for a in CustodyAction)
_ENVIRONMENTS = tuple(e.value for e in Environment)
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
                row = _json_line(line)
            except json.JSONDecodeError as exc:
                yield number, {"__error__": f"not JSON ({exc.msg})"}
                continue
            yield number, row if isinstance(row, dict) else {"__error__": "not a JSON object"}


_decode = json.JSONDecoder().raw_decode


def _json_line(line: str) -> Any:
    """json.loads(line), a step quicker for the usual line: an object and nothing around it."""
    if line.startswith("{"):
        try:
            value, end = _decode(line)
        except json.JSONDecodeError:
            pass
        else:
            if end == len(line):
                return value
    return json.loads(line)  # whitespace around, or not JSON: its own answer and message


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


#: what the checks made of one set of step parameters: the event's columns, and the
#: out-of-typical warnings in words ("" when none)
Checked = tuple[dict[str, Any], str]
_SCALARS = frozenset({str, int, float, bool, type(None)})


def _parameters_key(technique: str, details: Mapping[str, Any]) -> Hashable | None:
    """Equal only for parameters the checks cannot tell apart; None: do not remember them.

    The values' reprs tell 1 from 1.0, True and "1", and -0.0 from 0.0; only objects of
    plain values (what a file holds) are remembered.
    """
    if not _SCALARS.issuperset(map(type, details.values())):
        return None
    return technique, tuple(details), tuple(map(repr, details.values()))


def _step(row: Mapping[str, Any], details: dict[str, Any], confirm_warnings: bool,
          seen: dict[Hashable, Checked]) -> dict[str, Any]:
    """A step's columns: the technique, its validated parameters and their dose."""
    code = str(row.get("technique") or "")
    key = _parameters_key(code, details)
    checked = seen.get(key) if key is not None else None
    if checked is None:
        spec = techniques.get(code)
        validated = techniques.validate(spec.code, details)
        checked = ({"technique": spec.code, "is_destructive": spec.is_destructive,
                    "details": dict(validated.values),
                    **dose_columns(techniques.dose_for(spec, validated.values))},
                   "; ".join(w.message for w in validated.warnings))
        if key is not None:
            seen[key] = checked
    columns, warnings = checked
    if warnings and not confirm_warnings:
        raise InvalidInput("details", "", "values in the typical range (or confirm): " + warnings)
    return columns


def _by_kind(kind: str, row: Mapping[str, Any], details: dict[str, Any],
             confirm_warnings: bool, seen: dict[Hashable, Checked]) -> dict[str, Any]:
    """The columns a kind needs, checked as the services check them."""
    if kind == _STEP:
        return _step(row, details, confirm_warnings, seen)
    if kind == _CUSTODY:
        return {"action": one_of("action", row.get("action"), _ACTIONS), "details": details}
    if kind == _HANDLING:
        env = one_of("environment", row.get("environment"), _ENVIRONMENTS)
        return {"environment": env, "details": details}
    action = str(row.get("action") or "").strip()
    if not action:
        raise InvalidInput("action", action, "what was read (the indicator or quantity)")
    return {"action": action, "details": details}


#: what check_row gives the columns a row's kind leaves alone, so that every checked row
#: has the same columns
_UNDECIDED = {"technique": None, "action": None, "environment": None, "is_destructive": False,
              **dose_columns(techniques.Dose())}


def check_row(row: Mapping[str, Any], confirm_warnings: bool = False,
              seen: dict[Hashable, Checked] | None = None) -> dict[str, Any]:
    """One row as event columns (item and operator still codes); InvalidInput when bad.

    `seen` remembers the checks of step parameters met before (pass one dict per import).
    """
    if "__error__" in row:
        raise InvalidInput("row", "", str(row["__error__"]))
    if not row.keys() <= _KNOWN:
        raise InvalidInput("columns", sorted(set(row) - _KNOWN), "only " + ", ".join(COLUMNS))
    item = str(row.get("item") or "").strip()
    if not item:
        raise InvalidInput("item", row.get("item"), "an item code")
    kind = one_of("kind", row.get("kind"), _KINDS)
    occurred = _when("occurred_at", row.get("occurred_at"), True)
    ended = _when("ended_at", row.get("ended_at"), False)
    if ended is not None and occurred is not None and ended < occurred:
        raise InvalidInput("ended_at", ended.isoformat(), "at or after occurred_at")
    columns = _by_kind(kind, row, _details(row.get("details")), confirm_warnings,
                       {} if seen is None else seen)
    return {**_UNDECIDED, "item": item, "operator": str(row.get("operator") or "").strip(),
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
    seen: dict[Hashable, Checked] = {}
    for number, row in rows:
        try:
            good.append((number, check_row(row, confirm, seen)))
        except CurationError as exc:
            problems.append((number, str(exc)))
    return good, problems


def _resolve(session: Session, good: list[tuple[int, dict[str, Any]]],
             problems: list[tuple[int, str]]) -> tuple[dict[str, int], dict[str, int]]:
    """Item ids by code and person ids by username; a problem for each unknown one."""
    items = _ids(session, Item.code, Item.id, {r["item"] for _, r in good})
    people = _ids(session, Person.username, Person.id, {r["operator"] for _, r in good} - {""})
    for number, row in good:
        if row["item"] not in items:
            problems.append((number, f"item: no item with code {row['item']!r}"))
        if row["operator"] and row["operator"] not in people:
            problems.append((number, f"operator: no person with username {row['operator']!r}"))
    return items, people


def import_events(session: Session, *, actor: Person, rows: Iterable[tuple[int, Mapping[str, Any]]],
                  confirm_warnings: bool = False) -> Imported:
    """Check every row, then write them all (or raise ImportRejected and write nothing)."""
    ledger.attribute(session, actor)
    with _collector_paused():
        good, problems = _checked(rows, confirm_warnings)
        items, people = _resolve(session, good, problems)
        if problems:
            raise ImportRejected(sorted(problems))
        session.flush()
        table = Event.__table__
        blank = _blank_row(table, utcnow())
        ids = _new_ids(session, table, len(good))
        for start in range(0, len(good), CHUNK):
            chunk = [row for _, row in good[start:start + CHUNK]]
            ledger.insert_columns(session, table, _columns(
                blank, chunk, ids[start:start + CHUNK], items, people, actor.id))
    return Imported(len(good), dict(Counter(row["kind"] for _, row in good)))


@contextmanager
def _collector_paused() -> Iterator[None]:
    """Pause Python's cycle collector: it would walk the import's (acyclic) rows again and
    again as they pile up, a sixth of a 20 000-row import's time; it runs again afterwards."""
    paused = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if paused:
            gc.enable()


def _blank_row(table: Table, now: datetime) -> dict[str, Any]:
    """Every column, holding what a row that does not give it gets."""
    blank: dict[str, Any] = dict.fromkeys(c.name for c in table.columns)
    blank.update(recorded_at=now, details={}, summary="", note="", is_destructive=False,
                 is_dose_reported=False)
    return blank


def _columns(blank: dict[str, Any], rows: list[dict[str, Any]], ids: Sequence[int],
             items: dict[str, int], people: dict[str, int], actor_id: int) -> ledger.Columns:
    """Checked rows column by column, every column filled, codes replaced by ids; empty
    details share one object, which the ledger and the driver then encode once."""
    names = list(rows[0])  # every checked row has the same keys
    given = dict(zip(names, zip(*map(itemgetter(*names), rows))))
    columns: dict[str, Sequence[Any]] = {
        name: given.get(name) or [default] * len(rows) for name, default in blank.items()}
    columns["id"] = ids
    columns["item_id"] = list(map(items.__getitem__, map(itemgetter("item"), rows)))
    columns["actor_id"] = list(map(people.get, map(itemgetter("operator"), rows),
                                   repeat(actor_id)))
    columns["details"] = [details or blank["details"] for details in columns["details"]]
    return columns


def _new_ids(session: Session, table: Table, count: int) -> Sequence[int]:
    """Ids for `count` new rows, in order: from the id sequence on PostgreSQL; on SQLite the
    next ones after the largest (a writing transaction there holds the database's lock)."""
    if session.get_bind().dialect.name == "postgresql":
        return sorted(session.scalars(text(
            "SELECT nextval(pg_get_serial_sequence(:table, 'id')) FROM generate_series(1, :n)"),
            {"table": table.name, "n": count}))
    start = (session.scalar(select(func.max(table.c.id))) or 0) + 1
    return range(start, start + count)
