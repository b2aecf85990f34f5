"""The demo asks for a login; a wrong password is refused; an auditor reads but records no custody."""

from __future__ import annotations

from typing import Any

from tests.e2e.conftest import log_in


def test_the_demo_asks_for_login_and_refuses_a_wrong_password(guest_page: Any) -> None:
    guest_page.goto("/items")
    assert "/login?next=" in guest_page.url
    log_in(guest_page, "demo-curator", "not-the-password")
    assert guest_page.get_by_role("alert").inner_text().count("unknown username or wrong password") == 1
    assert "/login" in guest_page.url


def test_an_auditor_opens_findings_but_has_no_custody_forms(guest_page: Any) -> None:
    guest_page.goto("/findings")
    log_in(guest_page, "demo-auditor", "demo-auditor-pass")
    guest_page.wait_for_url(lambda url: "/login" not in url)
    guest_page.goto("/findings")
    assert guest_page.get_by_role("heading", level=1).count() == 1
    assert "demo-auditor" in guest_page.locator(".session-user").inner_text()
    code = guest_page.locator("a[href^='/items/']").first.get_attribute("href").split("/")[2]
    guest_page.goto(f"/custody/{code}")
    assert guest_page.locator("form[action*='/custody/']").count() == 0
    assert "does not record custody events" in guest_page.content()
