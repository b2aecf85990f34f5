"""A synthetic collection at mission scale, written in bulk and still chained in the ledger.

Particles arrive in vacuum capsules, sit on mounts, are split into fragments, wedges,
lamellae and atom-probe needles (derivation trees up to depth 6), needles stand on coupons
(capsule ⊃ mount ⊃ coupon: containers three deep), and every item gets custody, handling and
steps of every technique family with parameters cleaned by `curation.techniques`. Rows go in
with Core inserts, table by table, and `ledger.append_rows` hashes each one, so
`ledger verify` holds. The same seed writes the same collection (ids, codes, times).
"""

from __future__ import annotations

import random
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from datetime import datetime, timedelta, timezone
from typing import Any

from sqlalchemy import Table, func, select, text
from sqlalchemy.orm import Session

from curation import ledger, techniques
from curation.db import utcnow
from curation.model import (
    Derivation,
    EnvironmentReading,
    Event,
    Instrument,
    Item,
    Location,
    Person,
    Placement,
    Station,
)
from curation.services.events import dose_columns

#: the deepest derivation the generator makes: particle → ... → needle
MAX_DEPTH = 6
#: kind of the item cut at each depth, and the letter its code takes
KIND_AT = {1: "fragment", 2: "fragment", 3: "wedge", 4: "wedge", 5: "lamella", 6: "needle"}
LETTER = {"fragment": "F", "wedge": "W", "lamella": "L", "needle": "N"}
#: the step that makes each kind
CUT_BY = {"fragment": "split", "wedge": "fib-liftout", "lamella": "fib-liftout",
          "needle": "fib-needle-sharpening"}
#: technique families run on items of each kind (cutting steps come on top)
FAMILIES = {
    "particle": ("xct", "sem", "eds", "preparation"),
    "fragment": ("sem", "eds", "ebsd", "fib"),
    "wedge": ("fib", "sem"),
    "lamella": ("tem", "stem", "tkd", "fib"),
    "needle": ("apt", "fib"),
}
#: particles per capsule (one capsule, mount and coupon each)
PER_CAPSULE = 20
#: particles written per batch: bounds memory at any size
BATCH = 200
ORIGIN = datetime(2031, 1, 6, 8, 0, tzinfo=timezone.utc)
ACTOR = "bench-generator"


@dataclass(frozen=True)
class Plan:
    """How big a collection to write."""

    particles: int
    seed: int = 0
    #: descendants per particle on average
    subsamples_per_particle: int = 10
    #: events per item on average (custody, handling, steps)
    events_per_item: int = 9
    #: descendants of the first particle, for the large-family benchmarks (0: ordinary)
    large_family: int = 0


@dataclass
class Generated:
    """What was written: row counts by table, and codes the benchmarks look up."""

    counts: dict[str, int] = field(default_factory=dict)
    #: the particle with the large family (or the first particle)
    large_family: str = ""
    #: a needle at the deepest derivation depth
    deep_needle: str = ""
    #: a station (with an instrument running FIB) for step submissions
    station: str = ""
    operator: str = ""


def clean_params(code: str) -> dict[str, Any]:
    """Mid-typical values for a technique's fields, cleaned by `techniques.validate`."""
    spec = techniques.get(code)
    raw: dict[str, Any] = {}
    for f in spec.fields:
        rng = f.typical or f.hard
        if f.kind == "choice":
            raw[f.name] = f.choices[0]
        elif f.kind == "text" and f.required:
            raw[f.name] = "synthetic"
        elif f.kind in ("number", "integer") and (f.required or f.typical is not None):
            low = rng.low if rng.low is not None else 1.0
            mid = (low + rng.high) / 2 if rng.high is not None else low * 2 or 1.0
            raw[f.name] = round(mid) if f.kind == "integer" else round(mid, 3)
    try:
        return dict(techniques.validate(code, raw).values)
    except techniques.ValidationFailed:
        required = {k: v for k, v in raw.items() if spec.field(k).is_required(raw)}  # type: ignore[union-attr]
        return dict(techniques.validate(code, required).values)


class _Rows:
    """Rows buffered per table, with the next id of each, written in dependency order."""

    ORDER = ("people", "locations", "instruments", "stations", "items", "events",
             "derivations", "placements", "environment_readings")

    def __init__(self, session: Session, tables: Mapping[str, Table]) -> None:
        self.session, self.tables = session, tables
        self.buffer: dict[str, list[dict[str, Any]]] = {name: [] for name in self.ORDER}
        self.next_id = {name: (session.scalar(select(func.max(t.c.id))) or 0) + 1
                        for name, t in tables.items()}
        self.counts = dict.fromkeys(self.ORDER, 0)
        self.now = utcnow().replace(microsecond=0)

    def add(self, table: str, **values: Any) -> int:
        """Buffer one row (every column filled from the defaults); returns its id."""
        row_id = values["id"] = self.next_id[table]
        self.next_id[table] += 1
        for column in self.tables[table].columns:
            if column.name not in values:
                values[column.name] = _default(column, self.now)
        self.buffer[table].append(values)
        return row_id

    def write(self) -> None:
        """Insert every buffered row and append its ledger entry, table by table."""
        conn = self.session.connection()
        for name in self.ORDER:
            rows = self.buffer[name]
            if rows:
                table = self.tables[name]
                conn.execute(table.insert(), rows)
                ledger.append_rows(self.session, [(table, "insert", r) for r in rows])
                self.counts[name] += len(rows)
                self.buffer[name] = []


def _default(column: Any, now: datetime) -> Any:
    default = column.default
    if default is None:
        return None
    if default.is_scalar:
        return default.arg
    return now if column.name.endswith("_at") else default.arg(None)


@dataclass
class _World:
    """The fixed cast: people, places, stations by family, cleaned parameters by technique."""

    people: list[int]
    store: int
    glovebox: int
    cleanroom: int
    station_for: dict[str, tuple[int, int]]
    params: dict[str, dict[str, Any]]
    doses: dict[str, dict[str, Any]]


def _cast(rows: _Rows, tag: str) -> tuple[_World, Generated]:
    people = [rows.add("people", username=f"{tag}-op{i}", name=f"Synthetic Operator {i}",
                       affiliation="Synthetic Laboratory") for i in range(1, 9)]
    place = {kind: rows.add("locations", code=f"{tag}-{kind}", name=f"Synthetic {kind}",
                            kind=kind, laboratory="Synthetic Laboratory",
                            iso_class=5.0 if kind == "cleanroom" else None)
             for kind in ("store", "glovebox", "cleanroom", "instrument", "lab")}
    families = techniques.families()
    station_for: dict[str, tuple[int, int]] = {}
    for fam in families:
        where = place["lab"] if fam == "preparation" else place["instrument"]
        instrument = None if fam == "preparation" else rows.add(
            "instruments", code=f"{tag}-{fam}", name=f"Synthetic {fam} instrument",
            techniques=fam if fam != "fib" else "fib sem", location_id=where)
        station = rows.add("stations", code=f"{tag}-st-{fam}", name=f"{fam} station",
                           instrument_id=instrument, location_id=where)
        station_for[fam] = (station, where)
    params = {code: clean_params(code) for code in techniques.TECHNIQUES}
    doses = {code: dose_columns(techniques.dose_for(code, p)) for code, p in params.items()}
    world = _World(people, place["store"], place["glovebox"], place["cleanroom"], station_for,
                   params, doses)
    return world, Generated(operator=f"{tag}-op1", station=f"{tag}-st-fib")


def _shape(rng: random.Random, descendants: int) -> list[tuple[int, int]]:
    """(parent index, depth) of each descendant; index 0 is the particle, the first six a chain."""
    nodes = [(-1, 0)]
    for k in range(min(descendants, MAX_DEPTH)):
        nodes.append((k, k + 1))
    open_ = [i for i, (_, d) in enumerate(nodes) if d < MAX_DEPTH]
    while len(nodes) - 1 < descendants:
        parent = open_[rng.randrange(len(open_))]
        depth = nodes[parent][1] + 1
        nodes.append((parent, depth))
        if depth < MAX_DEPTH:
            open_.append(len(nodes) - 1)
    return nodes[1:]


def _event(rows: _Rows, w: _World, rng: random.Random, item: int, kind: str, at: datetime,
           **values: Any) -> int:
    return rows.add("events", kind=kind, item_id=item, occurred_at=at,
                    actor_id=rng.choice(w.people), **values)


def _step(rows: _Rows, w: _World, rng: random.Random, item: int, code: str, at: datetime,
          **details: Any) -> int:
    spec = techniques.get(code)
    station, where = w.station_for[spec.family]
    return _event(rows, w, rng, item, "step", at, ended_at=at + timedelta(minutes=30),
                  station_id=station, location_id=where, technique=code,
                  is_destructive=spec.is_destructive, summary=spec.label,
                  details={**w.params[code], **details}, **w.doses[code])


def _life(rows: _Rows, w: _World, rng: random.Random, item: int, kind: str, start: datetime,
          count: int) -> datetime:
    """Custody, handling and steps on one item from `start`; returns the time after them."""
    at = start
    _event(rows, w, rng, item, "custody", at, action="receipt", location_id=w.cleanroom,
           summary="received")
    for n in range(max(count - 1, 0)):
        at += timedelta(minutes=rng.randint(20, 240))
        if n % 4 == 0:
            env = rng.choice(("n2-glovebox", "vacuum", "cleanroom", "air"))
            _event(rows, w, rng, item, "handling", at, ended_at=at + timedelta(minutes=15),
                   environment=env, location_id=w.glovebox if env == "n2-glovebox" else w.cleanroom,
                   details={"materials": ["ptfe"]}, summary=f"handled in {env}")
        else:
            family = rng.choice(FAMILIES[kind])
            code = rng.choice([t.code for t in techniques.for_family(family) if not t.creates])
            _step(rows, w, rng, item, code, at)
    return at + timedelta(hours=1)


@dataclass
class _Holders:
    """The capsule, mount and coupon of one group of particles, and the next free post."""

    capsule: int
    mount: int
    coupon: int
    posts: int = 0


def _holders(rows: _Rows, tag: str, n: int) -> _Holders:
    ids = [rows.add("items", code=f"{tag}-{kind[:3].upper()}{n:05d}", kind=kind,
                    material="stainless steel", status="in-analysis", created_at=ORIGIN,
                    description=f"Synthetic {kind}")
           for kind in ("capsule", "mount", "coupon")]
    for inner, outer in ((ids[1], ids[0]), (ids[2], ids[1])):
        rows.add("placements", item_id=inner, container_id=outer, placed_at=ORIGIN)
    return _Holders(*ids)


def _item(rows: _Rows, code: str, kind: str, at: datetime, **values: Any) -> int:
    return rows.add("items", code=code, kind=kind, material="olivine-serpentine aggregate",
                    status="in-analysis", created_at=at, is_pristine=True,
                    description=f"Synthetic {kind}", **values)


def _family(rows: _Rows, w: _World, rng: random.Random, plan: Plan, code: str, t0: datetime,
            box: _Holders, size: int) -> list[tuple[int, str, int]]:
    """One particle and its descendants; returns (id, code, depth) of each."""
    per = plan.events_per_item
    particle = _item(rows, code, "particle", t0, mass_ug=round(rng.uniform(0.2, 2.0), 3),
                     mass_method="weighed", mass_uncertainty_ug=0.01)
    rows.add("placements", item_id=particle, container_id=box.mount, placed_at=t0)
    made = [(particle, code, 0)]
    ready = [_life(rows, w, rng, particle, "particle", t0, per)]
    counters: dict[int, int] = {}
    for parent, depth in _shape(rng, size):
        parent_id, parent_code, _ = made[parent]
        kind = KIND_AT[depth]
        counters[parent] = counters.get(parent, 0) + 1
        child_code = f"{parent_code}-{LETTER[kind]}{counters[parent]}"
        at = ready[parent] = ready[parent] + timedelta(minutes=rng.randint(10, 90))
        step = _cut(rows, w, rng, parent_id, kind, at)
        cut = at + timedelta(minutes=30)
        child = _item(rows, child_code, kind, cut)
        rows.add("derivations", parent_id=parent_id, child_id=child, step_id=step, derived_at=cut)
        if kind == "needle":
            box.posts += 1
            rows.add("placements", item_id=child, container_id=box.coupon, placed_at=cut,
                     position=f"post-{box.posts:02d}")
        made.append((child, child_code, depth))
        ready.append(_life(rows, w, rng, child, kind, cut, max(per - 1, 1)))
    return made


def _cut(rows: _Rows, w: _World, rng: random.Random, parent: int, kind: str,
         at: datetime) -> int:
    code = CUT_BY[kind]
    count = {"split": {"fragment_count": 2}, "fib-needle-sharpening": {"needle_count": 1},
             "fib-liftout": {"child_kind": kind}}[code]
    return _step(rows, w, rng, parent, code, at, **count)


def _readings(rows: _Rows, w: _World, rng: random.Random, at: datetime) -> None:
    rows.add("environment_readings", location_id=w.glovebox, kind="atmosphere", measured_at=at,
             actor_id=w.people[0], o2_ppm=round(rng.uniform(0.1, 0.9), 2),
             h2o_ppm=round(rng.uniform(0.1, 0.9), 2))


def _tables() -> dict[str, Table]:
    models = (Person, Location, Instrument, Station, Item, Event, Derivation, Placement,
              EnvironmentReading)
    return {m.__tablename__: m.__table__ for m in models}  # type: ignore[misc]


def _sizes(plan: Plan, rng: random.Random) -> Iterator[int]:
    """Descendants of each particle: the large family first, the others around the mean."""
    for n in range(plan.particles):
        if n == 0 and plan.large_family:
            yield plan.large_family
        else:
            yield rng.randint(0, 2 * plan.subsamples_per_particle)


def generate(session: Session, plan: Plan) -> Generated:
    """Write the collection `plan` describes; flushes, never commits."""
    if plan.particles < 1:
        raise ValueError("at least one particle")
    ledger.attribute(session, ACTOR)
    session.flush()
    rng = random.Random(plan.seed)
    tag = f"SYN{plan.seed}"
    rows = _Rows(session, _tables())
    world, out = _cast(rows, tag)
    box = _holders(rows, tag, 0)
    for n, size in enumerate(_sizes(plan, rng)):
        if n and n % PER_CAPSULE == 0:
            box = _holders(rows, tag, n // PER_CAPSULE)
        t0 = ORIGIN + timedelta(hours=6 * n)
        made = _family(rows, world, rng, plan, f"{tag}-P{n + 1:05d}", t0, box, size)
        _readings(rows, world, rng, t0)
        if n == 0:
            out.large_family = made[0][1]
            out.deep_needle = next((c for _, c, d in made if d == MAX_DEPTH), "")
        if len(rows.buffer["events"]) > BATCH * plan.events_per_item * 10:
            rows.write()
    rows.write()
    _resume_sequences(session, rows.tables.values())
    out.counts = rows.counts
    return out


def _resume_sequences(session: Session, tables: Any) -> None:
    """PostgreSQL: move each id sequence past the ids written here, for later ORM inserts."""
    if session.get_bind().dialect.name != "postgresql":
        return
    for table in tables:
        session.execute(text(
            f"SELECT setval(pg_get_serial_sequence('{table.name}', 'id'), "
            f"(SELECT max(id) FROM {table.name}))"))
