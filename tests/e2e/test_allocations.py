"""Allocations in a real browser: the dashboard, and the demo's report with its imbalance."""

from __future__ import annotations

import re

import pytest

pytestmark = pytest.mark.browser


def test_dashboard_to_report_shows_the_missing_needle(demo_page) -> None:
    demo_page.goto("/")
    demo_page.get_by_role("link", name="Allocations", exact=True).click()
    demo_page.wait_for_url(re.compile("/allocations$"))
    rows = demo_page.locator("tr.allocation-row")
    assert rows.count() == 3
    assert "NOT balanced" in demo_page.locator('tr[data-reference="AMB-2026-004"]').inner_text()
    demo_page.get_by_role("link", name="AMB-2026-004", exact=True).click()
    demo_page.get_by_role("link", name="Allocation report", exact=True).click()
    demo_page.wait_for_url(re.compile("/allocations/AMB-2026-004/report$"))
    findings = demo_page.locator("#table-findings").inner_text()
    assert "allocation-unbalanced" in findings and "KR-0313-N3" in findings
    remaining = demo_page.locator("#table-remaining").inner_text()
    assert "UNACCOUNTED" in remaining
    assert demo_page.locator("figure svg").count() == 2


def test_first_loan_balances_every_item(demo_page) -> None:
    demo_page.goto("/allocations/AMB-2025-031/report")
    cells = demo_page.locator("#table-accounting tbody tr td:last-child").all_inner_texts()
    assert len(cells) == 12 and set(cells) == {"yes"}
