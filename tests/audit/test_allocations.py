"""Allocation accounting on hand-built lineages: a lamella returned, a needle declared lost,
a needle missing with no record, a transfer; overdue reports and returns; outside users.

Masses from volumes use the Handbook of Mineralogy density of forsterite, 3.275 g/cm3, and
1 um3 x 1 g/cm3 = 1e-12 g = 1e-6 ug. The identity is checked with exact fractions against
terms summed independently of the code.
"""

from __future__ import annotations

from fractions import Fraction

import pytest

from curation.audit import allocations as acc
from curation.audit import engine
from curation.model import Item
from curation.services import accounts, allocations, events, items
from tests.conftest import hours

RHO = 3.275  # forsterite, g/cm3, Handbook of Mineralogy (Anthony et al.)
LAMELLA_UM3, LAMELLA_CUT_UM3, NEEDLE_UM3, NEEDLE_CUT_UM3 = 200.0, 7000.0, 20.0, 1000.0


def ug(volume_um3: float) -> Fraction:
    """Mass in ug of a forsterite volume, exactly."""
    return Fraction(volume_um3) * Fraction(str(RHO)) / 10**6


@pytest.fixture
def loan(session, operator):
    """A 10 ug particle on a mount, a lamella (returned on its grid) and a needle cut from it."""
    s, op = session, operator
    mount = items.register_item(s, actor=op, code="AL-M", kind="mount", created_at=hours(0))
    grid = items.register_item(s, actor=op, code="AL-G", kind="grid", created_at=hours(0))
    particle = items.register_item(s, actor=op, code="AL-P", kind="particle", created_at=hours(0),
                                   material="forsterite", mass_ug=10.0, mass_uncertainty_ug=0.1,
                                   mass_method="weighed")
    items.place(s, actor=op, item=particle, container=mount, placed_at=hours(0))
    a = allocations.open_allocation(s, actor=op, reference="AL-1", facility="Facility",
                                    investigator=op, starts_at=hours(0))
    allocations.issue_item(s, actor=op, allocation=a, item=particle, issued_at=hours(0),
                           allocated_mass_ug=10.0)
    made = {}
    for code, kind, volume, removed, at in (("AL-L", "lamella", LAMELLA_UM3, LAMELLA_CUT_UM3, 1),
                                            ("AL-N", "needle", NEEDLE_UM3, NEEDLE_CUT_UM3, 2)):
        step = events.record_event(s, actor=op, kind="step", item=particle, occurred_at=hours(at),
                                   technique="fib-liftout", is_destructive=True)
        child = items.register_item(s, actor=op, code=code, kind=kind, created_at=hours(at),
                                    material="forsterite", volume_um3=volume)
        items.derive(s, actor=op, parent=particle, child=child, derived_at=hours(at), step=step,
                     removed_volume_um3=removed)
        made[kind] = child
    items.place(s, actor=op, item=made["lamella"], container=grid, placed_at=hours(1))
    items.place(s, actor=op, item=made["needle"], container=mount, placed_at=hours(2))
    return a, particle, made["lamella"], made["needle"], grid


def _account(session, a) -> acc.Account:
    return acc.accounts(acc.load(session, [a.id]), a.id)[0]


def _return_lamella(session, operator, a, lamella, grid) -> None:
    facility = accounts.add_person(session, actor="test", username="fac", name="Facility Curator")
    sent = events.record_event(session, actor=operator, kind="custody", item=grid,
                               occurred_at=hours(5), action="release", counterparty=facility)
    allocations.record_return(session, actor=operator, allocation=a, item=lamella,
                              returned_at=hours(5), event=sent, condition="intact")


def _declare_lost(session, operator, needle: Item):
    return events.record_event(session, actor=operator, kind="custody", item=needle,
                               occurred_at=hours(6), action="declared-lost",
                               summary="fell off the post")


def test_lost_needle_and_returned_lamella_balance(session, operator, loan) -> None:
    a, _, lamella, needle, grid = loan
    _return_lamella(session, operator, a, lamella, grid)
    lost = _declare_lost(session, operator, needle)
    got = _account(session, a)
    expected = {
        "consumed": ug(LAMELLA_CUT_UM3 - LAMELLA_UM3) + ug(NEEDLE_CUT_UM3 - NEEDLE_UM3),
        "returned": ug(LAMELLA_UM3), "lost": ug(NEEDLE_UM3), "transferred": Fraction(0),
    }
    expected["remaining"] = Fraction(10) - ug(LAMELLA_CUT_UM3) - ug(NEEDLE_CUT_UM3)
    for term, value in expected.items():
        assert Fraction(got.total(term)) == pytest.approx(value, rel=1e-12, abs=1e-15), term
    # the identity, exactly: issued minus the five independently summed terms is ~0
    assert abs(Fraction(10) - sum(expected.values())) == 0
    assert abs(got.discrepancy_ug) < 1e-12 and got.is_balanced
    lost_part = next(p for p in got.parts if p.term == "lost")
    assert lost_part.item.code == "AL-N" and lost_part.evidence == (lost.id,)
    returned = next(p for p in got.parts if p.term == "returned")
    assert returned.item.code == "AL-L" and returned.evidence
    remaining = next(p for p in got.parts if p.term == "remaining")
    assert remaining.note == "in AL-M"


def test_missing_needle_is_unbalanced_whatever_its_mass(session, operator, loan) -> None:
    a, particle, _, needle, _ = loan
    items.take_out(session, actor=operator, item=needle, removed_at=hours(3))
    got = _account(session, a)
    assert [p.item.code for p in got.unaccounted] == ["AL-N"]
    # far under the 0.1 ug uncertainty, and still a finding
    assert got.discrepancy_ug == pytest.approx(float(ug(NEEDLE_UM3)), rel=1e-9)
    assert abs(got.discrepancy_ug) < got.k * got.u_ug and not got.is_balanced
    found = [f for f in engine.audit_item(session, needle) if f.code == "allocation-unbalanced"]
    assert len(found) == 1 and "no record of where it is" in found[0].message
    assert not [f for f in engine.audit_item(session, particle)
                if f.code == "allocation-unbalanced"]


def test_weighing_that_misses_mass_beyond_the_uncertainty(session, operator, loan) -> None:
    a, particle, *_ = loan
    events.record_event(session, actor=operator, kind="step", item=particle, occurred_at=hours(4),
                        technique="weighing", details={"mass_ug": 8.0, "mass_uncertainty_ug": 0.1})
    got = _account(session, a)
    # 10 - 8 - the cuts: about 1.97 ug unexplained against a combined u of ~0.14 ug
    assert got.discrepancy_ug == pytest.approx(
        float(Fraction(10) - 8 - ug(LAMELLA_CUT_UM3) - ug(NEEDLE_CUT_UM3)), rel=1e-9)
    found = [f for f in engine.audit_item(session, particle) if f.code == "allocation-unbalanced"]
    assert found and "more than 2" in found[0].message


def test_transfer_moves_the_needle_to_the_sub_allocation(session, operator, loan) -> None:
    a, _, _, needle, _ = loan
    sub = allocations.transfer(session, actor=operator, allocation=a, reference="AL-1-T",
                               laboratory="Second lab", investigator=operator, items=[needle],
                               issued_at=hours(3))
    events.record_event(session, actor=operator, kind="step", item=needle, occurred_at=hours(4),
                        ended_at=hours(5), technique="apt", is_destructive=True)
    got = _account(session, a)
    assert Fraction(got.total("transferred")) == pytest.approx(ug(NEEDLE_UM3), rel=1e-12)
    assert got.is_balanced
    moved = acc.accounts(acc.load(session, [sub.id]), sub.id)
    assert len(moved) == 1 and moved[0].is_balanced
    assert moved[0].total("consumed") == pytest.approx(float(ug(NEEDLE_UM3)), rel=1e-12)


def test_report_overdue_until_submitted(session, operator, loan) -> None:
    a, particle, *_ = loan
    period = allocations.add_reporting_period(session, actor=operator, allocation=a,
                                              period_start=hours(0), period_end=hours(10),
                                              due_at=hours(20))
    before = [f for f in engine.audit_item(session, particle, now=hours(19))
              if f.code == "report-overdue"]
    after = [f for f in engine.audit_item(session, particle, now=hours(21))
             if f.code == "report-overdue"]
    assert not before and len(after) == 1 and "AL-1" in after[0].message
    allocations.submit_report(session, actor=operator, report=period, submitted_at=hours(22))
    assert not [f for f in engine.audit_item(session, particle, now=hours(23))
                if f.code == "report-overdue"]


def test_return_overdue_after_expiry(session, operator, loan) -> None:
    a = loan[0]
    a.expires_at = hours(30)
    session.flush()
    found = {f.item_code for f in acc.findings(acc.load(session, [a.id]), hours(31))
             if f.code == "return-overdue"}
    assert found == {"AL-P", "AL-L", "AL-N"}
    assert not [f for f in acc.findings(acc.load(session, [a.id]), hours(29))
                if f.code == "return-overdue"]


def test_used_outside_allocation(session, operator, loan) -> None:
    a, _, lamella, _, _ = loan
    stranger = accounts.add_person(session, actor="test", username="stranger", name="A Stranger")
    step = events.record_event(session, actor=stranger, kind="step", item=lamella,
                               occurred_at=hours(4), technique="tem-imaging")
    found = [f for f in engine.audit_item(session, lamella) if f.code == "used-outside-allocation"]
    assert len(found) == 1 and found[0].evidence == (step.id,)
    allocations.add_member(session, actor=operator, allocation=a, person=stranger,
                           role="analyst")
    assert not [f for f in engine.audit_item(session, lamella)
                if f.code == "used-outside-allocation"]
