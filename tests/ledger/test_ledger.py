"""The ledger: canonical JSON, SHA-256, the chain, and tampering caught by verify."""

from __future__ import annotations

import hashlib
import json
from datetime import datetime, timedelta, timezone

import pytest
import rfc8785
from sqlalchemy import func, select, text

from curation import ledger
from curation.errors import LedgerError
from curation.model import Item, LedgerEntry
from curation.services import accounts
from tests.conftest import T0


# FIPS 180-2, Appendix B.1 and B.2 (SHA-256 one-block and multi-block messages).
FIPS_180_2 = [
    (b"abc", "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"),
    (b"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq",
     "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"),
]


@pytest.mark.parametrize(("message", "digest"), FIPS_180_2)
def test_sha256_matches_fips_180_2_vectors(message: bytes, digest: str) -> None:
    assert hashlib.sha256(message).hexdigest() == digest


def test_entry_hash_is_sha256_of_the_canonical_content() -> None:
    fields = dict(seq=7, table_name="items", row_id="3", action="insert", state='{"a":1}',
                  actor="ana", recorded_at=T0, prev_hash="f" * 64)
    content = {"seq": 7, "table": "items", "row": "3", "action": "insert", "state": '{"a":1}',
               "actor": "ana", "at": "2026-03-02T08:00:00+00:00", "prev": "f" * 64}
    # The reference is hashlib over the rfc8785 library's bytes, computed independently here.
    expected = hashlib.sha256(rfc8785.dumps(content)).hexdigest()
    assert ledger.entry_hash(**fields) == expected
    assert ledger.entry_hash(**{**fields, "actor": "bob"}) != expected


def test_canonical_json_matches_rfc_8785_example() -> None:
    # RFC 8785 section 3.2.3, the sample input and its canonical form (from memory of the RFC).
    source = ('{"numbers": [333333333.33333329, 1E30, 4.50, 2e-3, 0.000000000000000000000000001],'
              ' "string": "\\u20ac$\\u000F\\u000aA\'\\u0042\\u0022\\u005c\\\\\\"\\/",'
              ' "literals": [null, true, false]}')
    expected = ('{"literals":[null,true,false],"numbers":[333333333.3333333,1e+30,4.5,0.002,1e-27],'
                '"string":"\u20ac$\\u000f\\nA\'B\\"\\\\\\\\\\"/"}')
    assert ledger.canonical(json.loads(source)) == expected


def test_canonical_json_sorts_keys_by_utf16_code_units() -> None:
    # RFC 8785 section 3.2.3, property sorting example: keys ordered by UTF-16 code units.
    obj = {"\u20ac": "Euro Sign", "\r": "Carriage Return", "\ufb33": "Hebrew Letter Dalet With Dagesh",
           "1": "One", "\U0001f600": "Emoji: Grinning Face", "\u0080": "Control",
           "\u00f6": "Latin Small Letter O With Diaeresis"}
    order = [k for k in json.loads(ledger.canonical(obj))]
    assert order == ["\r", "1", "\u0080", "\u00f6", "\u20ac", "\U0001f600", "\ufb33"]


def test_timestamps_are_written_as_utc() -> None:
    plus_two = timezone(timedelta(hours=2))
    assert ledger.plain(datetime(2026, 1, 1, 12, 0, tzinfo=plus_two)) == "2026-01-01T10:00:00+00:00"


def test_every_write_appends_a_chained_entry(session, operator, make_item) -> None:
    before = session.scalar(select(func.count()).select_from(LedgerEntry))
    item = make_item(material="olivine")
    item.status = "stored"
    session.flush()
    entries = session.scalars(select(LedgerEntry).where(
        LedgerEntry.table_name == "items", LedgerEntry.row_id == str(item.id))
        .order_by(LedgerEntry.seq)).all()
    assert [e.action for e in entries] == ["insert", "update"]
    assert json.loads(entries[-1].state)["status"] == "stored"
    assert entries[-1].actor == operator.username
    assert session.scalar(select(func.count()).select_from(LedgerEntry)) == before + 2
    chain = session.scalars(select(LedgerEntry).order_by(LedgerEntry.seq)).all()
    assert [e.seq for e in chain] == list(range(1, len(chain) + 1))
    assert all(b.prev_hash == a.hash for a, b in zip(chain, chain[1:]))
    assert ledger.verify(session).ok


def test_deletes_are_refused(session, make_item) -> None:
    item = make_item()
    session.delete(item)
    with pytest.raises(LedgerError, match="never deleted"):
        session.flush()


def test_a_write_without_an_actor_is_refused(session) -> None:
    session.info.pop(ledger.ACTOR_KEY, None)
    session.add(Item(code="NO-ACTOR", kind="particle", created_at=T0))
    with pytest.raises(LedgerError, match="no actor"):
        session.flush()


def _problems(session):
    result = ledger.verify(session)
    assert not result.ok
    return [(p.code, p.table, p.row, p.seq) for p in result.problems]


def test_hand_edit_of_a_domain_row_is_detected(session, make_item) -> None:
    item = make_item(material="olivine")
    session.commit()
    session.connection().execute(text("UPDATE items SET material = 'quartz' WHERE id = :i"),
                                 {"i": item.id})
    assert ("row-differs", "items", str(item.id), None) in _problems(session)


def test_row_inserted_behind_the_ledger_is_detected(session, make_item) -> None:
    make_item()
    session.commit()
    session.connection().execute(text(
        "INSERT INTO people (username, name, affiliation, is_active, created_at) "
        "VALUES ('intruder', 'X', '', true, '2026-01-01 00:00:00')"))
    new_id = session.scalar(text("SELECT id FROM people WHERE username = 'intruder'"))
    assert ("row-unrecorded", "people", str(new_id), None) in _problems(session)


def test_row_deleted_behind_the_ledger_is_detected(session) -> None:
    person = accounts.add_person(session, actor="test", username="leaver", name="L")
    session.commit()
    session.connection().execute(text("DELETE FROM people WHERE id = :i"), {"i": person.id})
    assert ("row-missing", "people", str(person.id), None) in _problems(session)


def test_altered_entry_is_named(session, make_item) -> None:
    item = make_item(material="olivine")
    session.commit()
    seq = session.scalar(select(LedgerEntry.seq).where(
        LedgerEntry.table_name == "items", LedgerEntry.row_id == str(item.id)))
    session.connection().execute(
        text("UPDATE ledger SET state = replace(state, 'olivine', 'quartz') WHERE seq = :s"),
        {"s": seq})
    result = ledger.verify(session)
    assert result.first_broken_seq == seq
    assert any(p.code == "entry-altered" and p.seq == seq for p in result.problems)


def test_removed_entry_is_named(session, make_item) -> None:
    make_item()
    make_item()
    session.commit()
    last = session.scalar(select(func.max(LedgerEntry.seq)))
    session.connection().execute(text("DELETE FROM ledger WHERE seq = :s"), {"s": last - 1})
    result = ledger.verify(session)
    assert result.first_broken_seq == last - 1
    codes = {p.code for p in result.problems}
    assert {"entry-missing", "chain-broken"} <= codes


def test_inserted_entry_is_detected(session, make_item) -> None:
    make_item()
    session.commit()
    last = session.scalars(select(LedgerEntry).order_by(LedgerEntry.seq.desc()).limit(1)).one()
    forged = dict(seq=last.seq + 1, table_name="items", row_id="999999", action="insert",
                  state='{"code":"FAKE"}', actor="nobody", recorded_at=T0, prev_hash=last.hash)
    forged["hash"] = ledger.entry_hash(**forged)
    session.execute(LedgerEntry.__table__.insert(), [forged])
    # The forged entry chains correctly, but it names a row the tables do not hold.
    assert ("row-missing", "items", "999999", None) in _problems(session)


def test_columns_added_by_a_later_migration_keep_old_rows_intact(session, make_item) -> None:
    item = make_item(material="olivine")
    session.commit()
    seq = session.scalar(select(LedgerEntry.seq).where(
        LedgerEntry.table_name == "items", LedgerEntry.row_id == str(item.id)))
    entry = session.get(LedgerEntry, seq)
    # Rewrite the entry as if it had been written before the column `volume_um3` existed.
    state = json.loads(entry.state)
    del state["volume_um3"]
    fields = dict(seq=entry.seq, table_name=entry.table_name, row_id=entry.row_id,
                  action=entry.action, state=ledger.canonical(state), actor=entry.actor,
                  recorded_at=entry.recorded_at, prev_hash=entry.prev_hash)
    session.connection().execute(text(
        "UPDATE ledger SET state = :state, hash = :hash WHERE seq = :seq"),
        {"state": fields["state"], "hash": ledger.entry_hash(**fields), "seq": seq})
    later = session.scalars(select(LedgerEntry).where(LedgerEntry.seq > seq)).all()
    for newer in later:  # re-chain what follows, as a migration-era ledger would read
        prev = session.scalar(select(LedgerEntry.hash).where(LedgerEntry.seq == newer.seq - 1))
        data = dict(seq=newer.seq, table_name=newer.table_name, row_id=newer.row_id,
                    action=newer.action, state=newer.state, actor=newer.actor,
                    recorded_at=newer.recorded_at, prev_hash=prev)
        session.connection().execute(text(
            "UPDATE ledger SET prev_hash = :p, hash = :h WHERE seq = :s"),
            {"p": prev, "h": ledger.entry_hash(**data), "s": newer.seq})
    session.expire_all()
    assert ledger.verify(session).ok  # the newer column holds its empty default
    session.connection().execute(text("UPDATE items SET volume_um3 = 5 WHERE id = :i"),
                                 {"i": item.id})
    assert ("row-differs", "items", str(item.id), None) in _problems(session)


def test_password_hashes_reach_the_ledger_only_as_digests(session) -> None:
    person = accounts.add_person(session, actor="test", username="pw-holder", name="P")
    person.password_hash = "$argon2id$v=19$m=19456,t=2,p=1$c2FsdA$aGFzaA"
    session.flush()
    state = session.scalars(select(LedgerEntry.state).where(
        LedgerEntry.table_name == "people", LedgerEntry.row_id == str(person.id))
        .order_by(LedgerEntry.seq.desc())).first()
    assert "argon2id" not in state
    # The digest is SHA-256 of the stored hash, so a swapped hash is still caught (hashlib).
    expected = hashlib.sha256(person.password_hash.encode()).hexdigest()
    assert json.loads(state)["password_hash"] == "sha256:" + expected
    assert ledger.verify(session).ok
    session.connection().execute(text("UPDATE people SET password_hash = 'x' WHERE id = :i"),
                                 {"i": person.id})
    assert ("row-differs", "people", str(person.id), None) in _problems(session)
