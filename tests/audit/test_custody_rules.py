"""Custody rules on hand-built chains, each with a case that trips it and one that must not.

Practice followed: ASTM E1492 / ISO/IEC 17025:2017 §7.4 — custody passes on a recorded
receipt by the intended recipient; one custodian at a time; seals checked against the id
applied (common practice, no source for the exact thresholds, which are ours).
"""

from __future__ import annotations

from curation.services import custody, events, items, stations
from tests.conftest import hours


def _received(session, people, item, who="alba", at=0.0, place=None):
    return custody.receive(session, actor=people[who], item=item, giver=None, at=hours(at),
                           location=place)


def test_clean_hand_over_raises_nothing(session, people, places, make_item, codes_for) -> None:
    grain = make_item()
    _received(session, people, grain, place=places["store-a"])
    custody.release(session, actor=people["alba"], item=grain, to=people["bruno"], at=hours(1))
    custody.receive(session, actor=people["bruno"], item=grain, giver=people["alba"],
                    at=hours(1.5), location=places["sem-a"])
    assert codes_for(session, grain) == []


def test_unreceived_transfer(session, people, make_item, codes_for, findings_for) -> None:
    grain = make_item()
    _received(session, people, grain)
    release = custody.release(session, actor=people["alba"], item=grain, to=people["bruno"],
                              at=hours(1))
    found = findings_for(session, grain)
    assert [f.code for f in found] == ["unreceived-transfer"]
    assert found[0].evidence == (release.id,) and "Bruno" in found[0].message
    # Not yet overdue: released an hour before 'now', inside the 24 h default.
    assert codes_for(session, grain, now_hours=2) == []


def test_receipt_by_other(session, people, make_item, findings_for) -> None:
    grain = make_item()
    _received(session, people, grain)
    rel = custody.release(session, actor=people["alba"], item=grain, to=people["bruno"], at=hours(1))
    rec = custody.receive(session, actor=people["chen"], item=grain, giver=people["alba"],
                          at=hours(1.2))
    found = findings_for(session, grain)
    assert [(f.code, f.evidence) for f in found] == [("receipt-by-other", (rel.id, rec.id))]


def test_double_custody(session, people, make_item, codes_for) -> None:
    grain = make_item()
    _received(session, people, grain)
    custody.receive(session, actor=people["bruno"], item=grain, giver=None, at=hours(2))
    assert codes_for(session, grain) == ["double-custody"]


def test_the_same_custodian_receiving_again_is_not_double(session, people, make_item, codes_for) -> None:
    grain = make_item()
    _received(session, people, grain)
    _received(session, people, grain, at=2)
    assert codes_for(session, grain) == []


def test_custody_gap(session, people, make_item, codes_for) -> None:
    grain = make_item()
    _received(session, people, grain)
    custody.release(session, actor=people["alba"], item=grain, to=people["bruno"], at=hours(1))
    custody.receive(session, actor=people["bruno"], item=grain, giver=people["alba"], at=hours(5))
    assert codes_for(session, grain) == ["custody-gap"]


def test_a_shipment_between_release_and_receipt_is_not_a_gap(session, people, make_item,
                                                             codes_for) -> None:
    grain = make_item()
    _received(session, people, grain)
    custody.release(session, actor=people["alba"], item=grain, to=people["bruno"], at=hours(1))
    custody.ship(session, actor=people["alba"], item=grain, at=hours(1.2), carrier="courier",
                 tracking_id="T1", to=people["bruno"])
    custody.receive(session, actor=people["bruno"], item=grain, giver=people["alba"], at=hours(30))
    assert codes_for(session, grain) == []


def test_seals(session, people, make_item, codes_for) -> None:
    capsule, grain = make_item(kind="capsule"), make_item()
    items.place(session, actor=people["alba"], item=grain, container=capsule, placed_at=hours(0))
    _received(session, people, capsule)
    custody.seal(session, actor=people["alba"], item=capsule, action="seal-applied",
                 seal_id="S-1", at=hours(1))
    custody.seal(session, actor=people["alba"], item=capsule, action="seal-checked",
                 seal_id="S-1", at=hours(2))
    assert codes_for(session, grain) == []
    custody.seal(session, actor=people["alba"], item=capsule, action="seal-checked",
                 seal_id="S-2", at=hours(3))
    custody.seal(session, actor=people["alba"], item=capsule, action="seal-checked",
                 seal_id="S-1", at=hours(4), intact=False)
    # The capsule's seal events reach the grain inside it.
    assert codes_for(session, grain) == ["seal-mismatch", "seal-broken"]


def test_location_conflict(session, people, places, make_item, codes_for, findings_for) -> None:
    needle = make_item()
    operator = people["alba"]
    custody.store(session, actor=operator, item=needle, location=places["store-a"], at=hours(0))
    _received(session, people, needle, at=0, place=places["store-a"])
    station = stations.add_station(session, actor="test", code="ST-SEM", name="SEM PC",
                                   instrument=None, location=places["sem-a"])
    events.record_event(session, actor=operator, kind="step", item=needle, occurred_at=hours(1),
                        technique="sem-imaging", station=station)
    assert codes_for(session, needle) == []  # same laboratory as the store
    far = stations.add_station(session, actor="test", code="ST-APT", name="APT PC",
                               instrument=None, location=places["apt-b"])
    apt = events.record_event(session, actor=operator, kind="step", item=needle,
                              occurred_at=hours(2), technique="apt", station=far)
    found = findings_for(session, needle)
    assert [f.code for f in found] == ["location-conflict"]
    assert found[0].evidence[-1] == apt.id


def test_never_in_custody(session, people, make_item, findings_for, codes_for) -> None:
    grain, capsule = make_item(), make_item(kind="capsule")
    found = findings_for(session, grain)
    assert [f.code for f in found] == ["custody-gap"] and "no custodian" in found[0].message
    assert codes_for(session, capsule) == []  # an empty container follows what it holds
    assert codes_for(session, grain, now_hours=0.5) == []  # registered half an hour ago
    items.place(session, actor=people["alba"], item=grain, container=capsule, placed_at=hours(0))
    _received(session, people, capsule, at=0)
    assert codes_for(session, grain) == []  # the capsule's custodian holds what is inside


def test_inventory_check_that_does_not_find_the_item(session, people, places, make_item,
                                                     codes_for) -> None:
    grain = make_item()
    custody.store(session, actor=people["alba"], item=grain, location=places["store-a"],
                  at=hours(0))
    custody.check_inventory(session, actor=people["alba"], item=grain,
                            location=places["store-a"], at=hours(2))
    assert codes_for(session, grain) == []
    custody.check_inventory(session, actor=people["alba"], item=grain,
                            location=places["store-a"], at=hours(3), found=False)
    assert codes_for(session, grain) == ["location-conflict"]
