"""The station page in a real browser: scan a wedge, log a FIB needle-sharpening step that makes
three needles on a coupon (confirming one out-of-typical value), then see them on the item page."""

from __future__ import annotations

import re
import sqlite3
from collections.abc import Iterator
from contextlib import closing
from typing import Any

import pytest
from sqlalchemy.orm import Session

from curation.db import make_engine
from curation.services import items
from curation.services.common import item_by_code, person_by_username
from tests.e2e.conftest import Scene, _tab, at, serving

pytestmark = pytest.mark.browser

#: where the station page screenshot goes, for a person to look at
SCREENSHOT = "/tmp/curation-station-page.png"
WEDGE, COUPON = "PX-1-W1", "CPN-E2E"


def _add_wedge_and_coupon(session: Session, particle: str) -> None:
    op = person_by_username(session, "opa")
    wedge = items.register_item(session, actor=op, code=WEDGE, kind="wedge",
                                created_at=at(11), material="olivine")
    items.derive(session, actor=op, parent=item_by_code(session, particle), child=wedge,
                 derived_at=at(11))
    items.register_item(session, actor=op, code=COUPON, kind="coupon", created_at=at(0),
                        material="silicon, 22 posts")


@pytest.fixture(scope="module")
def station_server(scene_database: tuple[str, Scene],
                   tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    """A copy of the browser scene plus a wedge cut from its particle and an empty coupon,
    so the needles this test makes stay out of the other browser tests."""
    path = tmp_path_factory.mktemp("e2e-station") / "station.db"
    with closing(sqlite3.connect(scene_database[0].removeprefix("sqlite:///"))) as source, \
            closing(sqlite3.connect(path)) as copy:
        source.backup(copy)  # a consistent copy even while the scene's server has it open
    engine = make_engine(f"sqlite:///{path}")
    with Session(engine) as session:
        _add_wedge_and_coupon(session, scene_database[1].particle)
        session.commit()
    engine.dispose()
    with serving(f"sqlite:///{path}") as base:
        yield base


@pytest.fixture
def station(browser: Any, station_server: str) -> Iterator[Any]:
    """A fresh tab on the station test server; fails on any console error (CSP included)."""
    yield from _tab(browser, station_server)


def _px(value: str) -> float:
    return float(value.removesuffix("px"))


def _fill_sharpening(form: Any) -> None:
    """Ga⁺ annular milling at 90 pA for 10 min over 4 µm², three needles onto posts 3–5."""
    form.locator("#operator").select_option("opa")
    form.locator("#p_ion_species").select_option("Ga")
    form.locator("#p_accelerating_voltage_kV").fill("30")
    form.locator("#p_beam_current_nA").fill("90 pA")
    form.locator("#p_needle_count").fill("3")
    form.locator("#p_apex_diameter_nm").fill("180")  # typical 50–150 nm: needs a confirmation
    form.locator("#p_exposure_time_s").fill("600")
    form.locator("#p_exposed_area_um2").fill("4")
    form.locator("#coupon").fill(COUPON)
    form.locator("#first_post").fill("3")


def test_scan_log_needle_sharpening_and_see_the_needles(station: Any) -> None:
    page = station
    page.goto("/stations")
    page.get_by_role("link", name="ST-FIB").click()
    page.wait_for_url("**/stations/ST-FIB")
    assert page.evaluate("document.activeElement.id") == "scan"  # ready for the scanner
    page.keyboard.type(WEDGE)  # what a USB scanner does: the code, then Enter
    page.keyboard.press("Enter")
    page.wait_for_url(re.compile(r"item=PX-1-W1"))
    assert WEDGE in page.locator(".session-items").inner_text()

    page.select_option("#technique", "fib-needle-sharpening")
    page.get_by_role("button", name="Add / show form").click()
    page.wait_for_url(re.compile(r"technique=fib-needle-sharpening"))
    form = page.locator("#step")
    assert "sharp" in form.locator(".caution-box").inner_text()
    assert "licensed practice" in form.locator(".caution-box").inner_text()
    assert form.locator("#p_accelerating_voltage_kV-unit").inner_text() == "kV"

    _fill_sharpening(form)
    form.get_by_role("button", name="Record fib-needle-sharpening on 1 item").click()
    page.wait_for_load_state()

    warning = page.locator("#p_apex_diameter_nm-warning")
    assert "180 nm is outside the typical range 50–150 nm" in warning.inner_text()
    assert page.evaluate("document.activeElement.id") == "confirm"
    page.screenshot(path=SCREENSHOT, full_page=True)
    page.keyboard.press("Space")  # tick "confirm and record" from the keyboard
    page.get_by_role("button", name="Record fib-needle-sharpening on 1 item").click()
    page.wait_for_url(re.compile(r"done=[0-9a-f]{32}$"))

    done = page.locator("#done")
    assert "ion fluence 8.43 × 10¹⁸ ions/cm²" in done.inner_text()
    made = done.locator(".made li")
    assert [" ".join(t.split()) for t in made.all_inner_texts()] == [f"needle {WEDGE}-N{n} on post-0{p} of {COUPON}"
                                      for n, p in ((1, 3), (2, 4), (3, 5))]
    assert "made PX-1-W1-N1, PX-1-W1-N2, PX-1-W1-N3" in page.locator(".flash").inner_text()
    assert page.evaluate("document.activeElement.id") == "scan"  # ready for the next item

    done.get_by_role("link", name=f"needle {WEDGE}-N1").click()
    page.wait_for_url(f"**/items/{WEDGE}-N1")
    assert f"{WEDGE}-N1" in page.locator("h1").inner_text()
    assert f"coupon {COUPON} at post-03" in " ".join(page.locator(".chain").inner_text().split())
    step = page.locator(".entry", has_text="fib-needle-sharpening")
    words = " ".join(step.inner_text().lower().split())
    assert "inherited" in words and f"from wedge {WEDGE}".lower() in words
    assert "ion fluence 8.43 × 10¹⁸ ions/cm²" in step.locator(".dose").inner_text()


def test_station_page_is_readable_with_gloves(station: Any) -> None:
    page = station
    page.goto(f"/stations/ST-FIB?item={WEDGE}&technique=fib-needle-sharpening")
    assert _px(page.evaluate("getComputedStyle(document.body).fontSize")) >= 18
    for selector in ("#scan", "#technique", ".station-scan button", "#operator",
                     "#p_beam_current_nA", "#p_ion_species", "#step button[type=submit]",
                     ".session-items a.action-link", ".masthead nav a"):
        box = page.locator(selector).first.bounding_box()
        assert box is not None and box["height"] >= 44, (selector, box)
    page.keyboard.press("Tab")
    assert _px(page.evaluate("getComputedStyle(document.activeElement).outlineWidth")) >= 3
