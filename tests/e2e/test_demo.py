"""The demo scenario in a real browser: the planted problems show as findings."""

from __future__ import annotations

import re

import pytest

pytestmark = pytest.mark.browser

#: what the demo plants (curation/demo_data) and the finding each must raise
PLANTED = [("KR-0309", "pristine-broken"), ("KR-0309", "exposure-over-limit"),
           ("KR-0309", "missing-control"), ("KR-0305-N3", "location-conflict"),
           ("PEL-TC-07", "unreceived-transfer"), ("VPL-WIT-03", "control-failed"),
           ("KR-0313-N3", "allocation-unbalanced")]


def test_findings_page_lists_the_planted_problems(demo_page) -> None:
    demo_page.goto("/findings")
    rows = demo_page.locator("tbody tr")
    text = " ".join(rows.all_inner_texts())
    for code, finding in PLANTED:
        assert code in text and finding in text
    assert rows.count() == len(PLANTED)


@pytest.mark.parametrize(("code", "finding"), sorted(PLANTED))
def test_item_page_shows_the_finding_beside_its_event(demo_page, code, finding) -> None:
    demo_page.goto("/items")
    search = demo_page.get_by_role("searchbox").first
    search.fill(code)
    search.press("Enter")
    demo_page.get_by_role("link", name=code, exact=True).first.click()
    demo_page.wait_for_url(re.compile(f"/items/{code}$"))
    findings = demo_page.locator("section", has=demo_page.get_by_role("heading", name="Findings"))
    assert finding in findings.inner_text()
    assert demo_page.get_by_text(f"evidence for {finding}").count() >= 1


def test_a_clean_particle_has_no_findings(demo_page) -> None:
    demo_page.goto("/items/KR-0302")
    assert "The audit finds nothing on this item." in demo_page.content()
