"""The custody desk and the findings page in a real browser."""

from __future__ import annotations

import re
from typing import Any

import pytest
from sqlalchemy.orm import Session

from curation.db import make_engine
from curation.services import accounts, items, stations
from tests.e2e.conftest import Scene, at

pytestmark = pytest.mark.browser

#: where the screenshots go, for a person to look at
DESK_SHOT = "/tmp/curation-custody-desk.png"
FINDINGS_SHOT = "/tmp/curation-findings.png"


@pytest.fixture(scope="module")
def desk_codes(scene_database: tuple[str, Scene]) -> dict[str, str]:
    """Two custodians, a store and two pristine grains added to the browser tests' database."""
    engine = make_engine(scene_database[0])
    try:
        with Session(engine) as session:
            cura = accounts.add_person(session, actor="setup", username="cura",
                                       name="Cora Curator")
            accounts.add_person(session, actor="setup", username="hugo", name="Hugo Holder")
            stations.add_location(session, actor=cura, code="DRY-3", name="Dry cabinet 3",
                                  kind="store")
            for code in ("GR-5", "GR-6"):
                items.register_item(session, actor=cura, code=code, kind="particle",
                                    created_at=at(0), is_pristine=True)
            session.commit()
    finally:
        engine.dispose()
    return {"handed": "GR-5", "exposed": "GR-6"}


def test_scan_release_and_receive_then_see_the_new_custodian(
        page: Any, scene: Scene, desk_codes: dict[str, str]) -> None:
    page.goto("/custody")
    assert page.evaluate("document.activeElement.id") == "code"
    page.keyboard.type(desk_codes["handed"])  # what a USB scanner does
    page.keyboard.press("Enter")
    page.wait_for_url(f"**/custody/{desk_codes['handed']}")
    assert "nobody on record" in page.locator("#custodian").inner_text()

    release = page.locator("#form-release")
    release.locator("#release-operator").select_option("cura")
    release.locator("#release-to").select_option("hugo")
    release.locator("#release-location").select_option("DRY-3")
    release.get_by_role("button", name="Record hand-over: release").click()
    page.wait_for_url(re.compile(r"#now$"))
    assert "Hugo Holder" in page.locator("#pending").inner_text()
    assert "Recorded event" in page.locator(".flash").inner_text()

    receipt = page.locator("#form-receipt")
    receipt.locator("#receipt-operator").select_option("hugo")
    receipt.locator("#receipt-giver").select_option("cura")
    receipt.locator("#receipt-condition").fill("vial closed, label legible")
    receipt.get_by_role("button", name="Record hand-over: receipt").click()
    page.wait_for_load_state()
    assert "Hugo Holder" in page.locator("#custodian").inner_text()
    assert page.locator("#pending").inner_text().strip() == "none"
    assert page.locator(".custody-chain li").count() == 2
    page.screenshot(path=DESK_SHOT, full_page=False)


def test_air_handling_of_a_pristine_grain_is_found_disposed_and_shown_on_the_item(
        page: Any, scene: Scene, desk_codes: dict[str, str]) -> None:
    code = desk_codes["exposed"]
    page.goto(f"/custody/{code}")
    handling = page.locator("#form-handling")
    assert "licensed practice" in handling.locator(".caution-box").inner_text()
    handling.locator("#handling-operator").select_option("cura")
    handling.get_by_label("air", exact=True).check()
    handling.get_by_label("ptfe").check()
    handling.get_by_role("button", name="Record handling").click()
    page.wait_for_url(re.compile(r"#now$"))

    page.get_by_role("link", name="Findings", exact=True).click()
    page.wait_for_url("**/findings")
    row = page.locator('tr.finding-row[data-key^="pristine-broken:"]',
                       has=page.locator(f'a[href="/items/{code}"]'))
    assert row.count() == 1
    text = row.inner_text()
    assert "pristine-broken" in text and "error" in text and "open" in text
    page.screenshot(path=FINDINGS_SHOT, full_page=True)

    row.get_by_role("link", name=re.compile("Record a disposition")).click()
    page.wait_for_url(re.compile(r"/findings/pristine-broken:"))
    form = page.locator("#dispose")
    form.locator("#dispose-operator").select_option("cura")
    form.get_by_label("accepted").check()
    form.locator("#dispose-reason").fill("exposed on purpose to test the rim response")
    form.get_by_role("button", name="Record the disposition").click()
    page.wait_for_load_state()
    assert "exposed on purpose" in page.locator(".disposition").first.inner_text()

    page.goto(f"/findings?item={code}&code=pristine-broken")
    assert "accepted" in page.locator("tr.finding-row").inner_text()

    page.goto(f"/items/{code}")
    marker = page.locator(".entry .evidence-mark a")
    assert marker.count() == 1 and "evidence for pristine-broken" in marker.inner_text()
    marker.click()
    target = page.evaluate("location.hash")
    assert "pristine-broken" in page.locator(target).inner_text()
    assert "exposed on purpose" in page.locator(target).inner_text()


def test_desk_and_findings_are_readable_with_gloves(
        page: Any, scene: Scene, desk_codes: dict[str, str]) -> None:
    for url in (f"/custody/{desk_codes['handed']}", "/findings", "/custody/environment/DRY-3"):
        page.goto(url)
        size = page.evaluate("getComputedStyle(document.body).fontSize")
        assert float(size.removesuffix("px")) >= 18
        for selector in ("main button", "main select", ".masthead nav a"):
            box = page.locator(selector).first.bounding_box()
            assert box is not None and box["height"] >= 44, (url, selector, box)


def test_environment_counts_show_the_class(page: Any, scene: Scene,
                                           desk_codes: dict[str, str]) -> None:
    page.goto("/custody/environment")
    page.locator("#location").select_option("DRY-3")
    page.get_by_role("button", name="Open").click()
    page.wait_for_url("**/custody/environment/DRY-3")
    counts = page.locator("#form-counts")
    counts.locator("#counts-operator").select_option("cura")
    counts.locator("#counts-c0_5").fill("3000")
    counts.locator("#counts-c1").fill("900")
    counts.get_by_role("button", name="Record").click()
    page.wait_for_url(re.compile(r"#readings$"))
    assert "ISO class 5.1" in page.locator(".flash").inner_text()
    assert "≥ 1 µm channel" in page.locator("#readings").inner_text()
