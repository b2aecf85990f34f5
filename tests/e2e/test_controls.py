"""The auditor's page over the demo: the witness coupon's failure and the items at risk."""

from __future__ import annotations

import pytest

from curation.demo_data.setting import (
    ANALOGUE, CAPSULE, MOUNT_01, MOUNT_02, PARTICLES, SPLIT, WITNESS,
)

pytestmark = pytest.mark.browser


def test_failed_witness_leads_to_what_was_in_the_glovebox(demo_page) -> None:
    demo_page.goto("/items")
    demo_page.get_by_role("link", name="Controls", exact=True).click()
    demo_page.get_by_role("link", name="Controls and at-risk items").first.click()
    failure = demo_page.locator("article.failure")
    assert failure.count() == 1 and WITNESS in failure.inner_text()
    codes = set(failure.locator("tbody tr td:first-child").all_inner_texts())
    # The demo opens the capsule (with every particle in it) in the glovebox with the witness,
    # the analogue standard and both mounts, and splits one particle there into two fragments.
    fragments = {f"{SPLIT}-F1", f"{SPLIT}-F2"}
    expected = {CAPSULE, ANALOGUE, MOUNT_01, MOUNT_02, *(p.code for p in PARTICLES), *fragments}
    assert codes == expected
    for row in failure.locator("tbody tr").all():
        assert row.locator("a[href^='/events/']").count() == 2  # the two events that link it


def test_deeper_tracing_and_a_refused_depth(demo_page) -> None:
    demo_page.goto("/studies")
    demo_page.get_by_role("link", name="Controls and at-risk items").first.click()
    first = demo_page.locator("article.failure tbody tr").count()
    demo_page.get_by_label("Follow shared exposures to depth").fill("2")
    demo_page.get_by_role("button", name="Trace again").click()
    assert demo_page.locator("article.failure tbody tr").count() > first
    assert "○ pass" in demo_page.content() and "✕ FAIL" in demo_page.content()
