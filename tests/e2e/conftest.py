"""Real-browser fixtures: a small SQLite database, the app under waitress, Debian's Chromium."""

from __future__ import annotations

import os
import shutil
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import datetime, timedelta, timezone
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy.orm import Session

from curation import create_app
from curation.db import make_engine, upgrade_to_head
from curation.services import accounts, events, items, stations
from curation.web.app import database

IN_CI = os.environ.get("CI", "").lower() == "true"
#: the system Chromium; Playwright's own browser downloads are never used
CHROMIUM = os.environ.get("CURATION_CHROMIUM", "/usr/bin/chromium")
CHROMIUM_ARGS = [
    "--no-sandbox", "--disable-gpu", "--disable-background-networking",
    "--disable-component-update", "--disable-sync", "--no-first-run",
]
T0 = datetime(2026, 3, 2, 8, 0, tzinfo=timezone.utc)
#: the scene's administrator login (username, password)
LOGIN = ("e2e-admin", "e2e-admin-password")
#: the demo's administrator login, as the README lists it
DEMO_LOGIN = ("demo-admin", "demo-admin-pass")


def at(hours: float) -> datetime:
    return T0 + timedelta(hours=hours)


def missing(reason: str) -> None:
    """Skip when the browser stack is absent, but fail in CI where it must be there."""
    if IN_CI:
        pytest.fail(f"CI=true but {reason}")
    pytest.skip(reason)


@dataclass(frozen=True)
class Scene:
    """Codes and event ids of the scene the browser tests walk through."""

    particle: str
    capsule: str
    lamella: str
    needle: str
    capsule_event: int
    particle_event: int
    needle_event: int
    wrong: int
    correction: int


def build_scene(session: Session) -> Scene:
    """A particle in a capsule, a lamella and a needle cut from it, events and one correction."""
    op = accounts.add_person(session, actor="setup", username="opa", name="Operator A")
    accounts.create_account(session, actor="setup", username=LOGIN[0], name="Browser Admin",
                            role="admin", password=LOGIN[1])
    room = stations.add_location(session, actor=op, code="RM-2", name="Beam room 2",
                                 kind="instrument")
    fib = stations.add_instrument(session, actor=op, code="FIB-A", name="Dual-beam A",
                                  location=room, techniques="sem fib")
    pc = stations.add_station(session, actor=op, code="ST-FIB", name="Dual-beam PC",
                              instrument=fib, location=room)

    def step(item: Any, hours: float, technique: str, **extra: Any) -> Any:
        return events.record_event(session, actor=op, kind="step", item=item, station=pc,
                                   occurred_at=at(hours), technique=technique, **extra)

    particle = items.register_item(session, actor=op, code="PX-1", kind="particle",
                                   created_at=at(0), material="olivine", status="in-analysis",
                                   mass_ug=2.4, mass_uncertainty_ug=0.2, mass_method="weighed")
    capsule = items.register_item(session, actor=op, code="CAP-7", kind="capsule",
                                  created_at=at(0))
    items.place(session, actor=op, item=particle, container=capsule, placed_at=at(0),
                removed_at=at(3))
    sealed = events.record_event(session, actor=op, kind="custody", item=capsule,
                                 occurred_at=at(1), action="seal-checked", summary="seal intact")
    imaged = step(particle, 4, "sem-imaging", summary="overview at 5 kV")
    cut = step(particle, 6, "fib-liftout", is_destructive=True, summary="lift-out under Pt cap")
    lamella = items.register_item(session, actor=op, code="PX-1-L1", kind="lamella",
                                  created_at=at(6), material="olivine")
    items.derive(session, actor=op, parent=particle, child=lamella, derived_at=at(6), step=cut)
    wrong = step(lamella, 8, "fib-lamella-thinning", summary="thinned to 80 nm")
    fixed = events.correct_event(session, actor=op, original=wrong, occurred_at=at(7.5),
                                 reason="station clock ran 30 minutes fast")
    needle = items.register_item(session, actor=op, code="PX-1-L1-N1", kind="needle",
                                 created_at=at(9), material="olivine")
    items.derive(session, actor=op, parent=lamella, child=needle, derived_at=at(9))
    sharpened = step(needle, 10, "fib-needle-sharpening", summary="annular milling")
    return Scene(particle.code, capsule.code, lamella.code, needle.code, sealed.id, imaged.id,
                 sharpened.id, wrong.id, fixed.id)


@pytest.fixture(scope="session")
def scene_database(tmp_path_factory: pytest.TempPathFactory) -> tuple[str, Scene]:
    """A migrated SQLite file holding the scene, written through the services."""
    url = f"sqlite:///{tmp_path_factory.mktemp('e2e') / 'scene.db'}"
    engine = make_engine(url)
    try:
        upgrade_to_head(engine)
        with Session(engine, expire_on_commit=False) as session:
            scene = build_scene(session)
            session.commit()
    finally:
        engine.dispose()
    return url, scene


@pytest.fixture(scope="session")
def scene(scene_database: tuple[str, Scene]) -> Scene:
    return scene_database[1]


def _stop(server: Any, thread: threading.Thread) -> None:
    """Close every socket from inside the server's loop, so the loop ends on its own."""
    def close_all() -> None:
        for channel in list(server._map.values()):
            if channel is not server and channel is not server.trigger:
                channel.handle_close()
        server.close()  # closes the trigger too; an empty socket map ends the loop

    server.trigger.pull_trigger(close_all)
    thread.join(timeout=10)
    server.task_dispatcher.shutdown()


@contextmanager
def serving(url: str) -> Iterator[str]:
    """The app on `url` served by waitress on a free local port."""
    import waitress

    app = create_app({"DATABASE_URL": url, "TESTING": True, "SECRET_KEY": "e2e"})
    server = waitress.create_server(app, host="127.0.0.1", port=0, threads=2)
    thread = threading.Thread(target=server.run, name="waitress", daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{server.effective_port}"
    finally:
        _stop(server, thread)
        engine = database(app).engine
        if engine is not None:
            engine.dispose()


@pytest.fixture(scope="session")
def live_server(scene_database: tuple[str, Scene]) -> Iterator[str]:
    """The app over the scene, for the whole session."""
    with serving(scene_database[0]) as base:
        yield base


@pytest.fixture(scope="session")
def demo_server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    """The app over a freshly built demo scenario, for the whole session."""
    from curation import demo_data

    url = f"sqlite:///{tmp_path_factory.mktemp('e2e-demo') / 'demo.db'}"
    engine = make_engine(url)
    try:
        upgrade_to_head(engine)
        with Session(engine, expire_on_commit=False) as session:
            demo_data.build(session)
            session.commit()
    finally:
        engine.dispose()
    with serving(url) as base:
        yield base


@pytest.fixture(scope="session")
def browser() -> Iterator[Any]:
    """Debian's Chromium driven by Playwright (never a downloaded browser)."""
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        missing("Playwright for Python is not installed")
    if not (Path(CHROMIUM).is_file() or shutil.which(CHROMIUM)):
        missing(f"no Chromium at {CHROMIUM}")
    with sync_playwright() as playwright:
        chromium = playwright.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        try:
            yield chromium
        finally:
            chromium.close()


@pytest.fixture
def page(browser: Any, live_server: str) -> Iterator[Any]:
    """A fresh browser tab on the scene's server; fails the test on any console error."""
    yield from _tab(browser, live_server, LOGIN)


@pytest.fixture
def demo_page(browser: Any, demo_server: str) -> Iterator[Any]:
    """A fresh browser tab on the demo's server; fails the test on any console error."""
    yield from _tab(browser, demo_server, DEMO_LOGIN)


@pytest.fixture
def guest_page(browser: Any, demo_server: str) -> Iterator[Any]:
    """A fresh browser tab on the demo's server, not logged in."""
    yield from _tab(browser, demo_server, None)


def log_in(tab: Any, username: str, password: str) -> None:
    """Log in through the login form, as a person would."""
    tab.goto("/login")
    tab.get_by_label("Username").fill(username)
    tab.get_by_label("Password").fill(password)
    tab.get_by_role("button", name="Log in").click()


def _tab(browser: Any, base_url: str, login: tuple[str, str] | None = LOGIN) -> Iterator[Any]:
    context = browser.new_context(base_url=base_url, viewport={"width": 1280, "height": 900})
    tab = context.new_page()
    if login is not None:
        # Once per browser context: the session cookie then carries every later page.
        log_in(tab, *login)
        tab.wait_for_url(lambda url: "/login" not in url)
    problems: list[str] = []
    tab.on("console", lambda msg: problems.append(msg.text) if msg.type == "error" else None)
    tab.on("pageerror", lambda exc: problems.append(str(exc)))
    try:
        yield tab
    finally:
        context.close()
    # A Content-Security-Policy violation shows up here as a console error.
    assert not problems, problems
