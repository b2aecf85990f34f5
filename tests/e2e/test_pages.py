"""The item pages in a real browser: search, timeline, lineage picture, event page."""

from __future__ import annotations

import re
from typing import Any

import pytest

from tests.e2e.conftest import Scene

pytestmark = pytest.mark.browser

#: where the item page screenshot goes, for a person to look at
SCREENSHOT = "/tmp/curation-item-page.png"


def _px(value: str) -> float:
    return float(value.removesuffix("px"))


def test_search_open_item_follow_the_picture_and_open_an_event(page: Any, scene: Scene) -> None:
    page.goto("/items")
    # autofocus: type straight away (the browser may focus just after the load event)
    page.wait_for_function("document.activeElement && document.activeElement.id === 'q'",
                           timeout=5000)
    page.keyboard.type(scene.needle.lower()[-8:])
    page.keyboard.press("Enter")
    page.wait_for_url(re.compile(r"/items\?q="))
    rows = page.locator("a.row-link")
    assert rows.all_inner_texts() == [scene.needle]

    rows.first.click()
    page.wait_for_url(f"**/items/{scene.needle}")
    assert scene.needle in page.locator("h1").inner_text()
    own = page.locator(f"#event-{scene.needle_event}")
    assert "entry-own" in (own.get_attribute("class") or "")
    assert "own event" in own.inner_text().lower()
    via = page.locator(f"#event-{scene.capsule_event}")
    assert "entry-inherited" in (via.get_attribute("class") or "")
    words = " ".join(via.locator(".reach").inner_text().split()).lower()
    assert f"from particle {scene.particle} through lamella {scene.lamella}".lower() in words
    assert f"via capsule {scene.capsule}".lower() in words
    page.screenshot(path=SCREENSHOT, full_page=True)

    page.locator(f'svg.lineage a[href="/items/{scene.particle}"]').click()
    page.wait_for_url(f"**/items/{scene.particle}")
    assert scene.particle in page.locator("h1").inner_text()
    marked = page.locator("svg.lineage g.current")
    assert marked.count() == 1 and "THIS ITEM" in (marked.text_content() or "")

    page.locator(f"#event-{scene.particle_event} .entry-title a").click()
    page.wait_for_url(f"**/events/{scene.particle_event}")
    assert f"Event #{scene.particle_event}" in page.locator("h1").inner_text()
    assert "ST-FIB" in page.locator("main").inner_text()


def test_superseded_event_is_struck_through_and_points_to_its_correction(
        page: Any, scene: Scene) -> None:
    page.goto(f"/items/{scene.lamella}")
    old = page.locator(f"#event-{scene.wrong}")
    struck = old.locator(".entry-title del")
    assert "line-through" in struck.evaluate("e => getComputedStyle(e).textDecorationLine")
    assert f"superseded by #{scene.correction}" in old.inner_text()
    old.locator(".superseded a").click()
    assert page.evaluate("location.hash") == f"#event-{scene.correction}"
    assert "30 minutes fast" in page.locator(f"#event-{scene.correction}").inner_text()


def test_readable_large_targets_and_keyboard(page: Any, scene: Scene) -> None:
    page.goto(f"/items/{scene.lamella}")
    assert _px(page.evaluate("getComputedStyle(document.body).fontSize")) >= 18
    for selector in ("#quick-q", ".quick-find button", ".masthead nav a", ".entry-title a",
                     "svg.lineage a"):
        box = page.locator(selector).first.bounding_box()
        assert box is not None and box["height"] >= 44, (selector, box)
    page.keyboard.press("/")  # the shortcut to the search field
    assert page.evaluate("document.activeElement.id") == "quick-q"
    page.keyboard.press("Tab")
    outline = page.evaluate("getComputedStyle(document.activeElement).outlineWidth")
    assert _px(outline) >= 3  # focus is visible
    caution = page.locator("footer").inner_text().lower()
    assert all(word in caution for word in ("beams", "vacuum", "cryogens", "needles", "solvents"))
