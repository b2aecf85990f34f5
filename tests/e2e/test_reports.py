"""The lineage report and the budget plot in a real browser, over the demo."""

from __future__ import annotations

import re

import pytest

pytestmark = pytest.mark.browser


def test_lineage_report_shows_tree_dose_and_mass(demo_page) -> None:
    demo_page.goto("/reports/lineage/KR-0302")
    tree = demo_page.get_by_role("group", name="Lineage of KR-0302")
    for code in ("KR-0302-L1", "KR-0302-W1", "KR-0302-N1", "KR-0302-N2"):
        assert tree.locator("text.code", has_text=code).count() == 1
    dose = demo_page.locator("#table-dose_budget")
    assert "electron dose" in dose.inner_text() and "study rules" in dose.inner_text()
    mass = demo_page.locator("#table-mass_budget")
    assert "KR-0302" in mass.inner_text() and "lizardite" in mass.inner_text()
    assert demo_page.locator("#descendant-count").inner_text() == "5"
    steps = demo_page.locator("#table-steps").inner_text()
    assert "fib-needle-sharpening" in steps and "apt" in steps


def test_report_is_reached_from_the_item_page_by_keyboard(demo_page) -> None:
    demo_page.goto("/items/KR-0305-N1")
    link = demo_page.get_by_role("link", name="Lineage report of its particle")
    link.focus()
    demo_page.keyboard.press("Enter")
    demo_page.wait_for_url(re.compile("/reports/lineage/KR-0305-N1$"))
    assert "Lineage report: KR-0305" in demo_page.locator("h1").inner_text()


def test_budget_plot_loads_on_the_item_page(demo_page) -> None:
    demo_page.goto("/items/KR-0305-N1")
    plot = demo_page.locator("img.budget-plot")
    plot.scroll_into_view_if_needed()
    demo_page.wait_for_function("document.querySelector('img.budget-plot').complete")
    assert plot.evaluate("img => img.naturalWidth") > 0


def test_pdf_download_is_served(demo_page) -> None:
    response = demo_page.request.get("/reports/lineage/KR-0302.pdf")
    assert response.ok and response.body().startswith(b"%PDF-")
    assert response.headers["content-type"] == "application/pdf"
