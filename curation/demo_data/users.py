"""The demo's logins: one per role, with passwords printed in the README (demo only)."""

from __future__ import annotations

from curation.demo_data.scene import Scene
from curation.demo_data.setting import DEMO_ACTOR
from curation.services import accounts, allocations

#: (username, full name, role, station code); the password is the username + "-pass"
DEMO_USERS = (
    ("demo-admin", "Demo Administrator", "admin", None),
    ("demo-curator", "Demo Curator", "curator", None),
    ("demo-analyst", "Demo Analyst", "analyst", None),
    ("demo-station", "Demo FIB-SEM Station", "station", "VPL-DB-PC"),
    ("demo-auditor", "Demo Auditor", "auditor", None),
)


def demo_password(username: str) -> str:
    """The documented password of a demo login (never use such passwords for real records)."""
    return f"{username}-pass"


def open_logins(scene: Scene) -> None:
    """One login per role; the analyst works on the first loan, the station at the FIB-SEM."""
    s = scene.session
    for username, name, role, station in DEMO_USERS:
        person, _ = accounts.create_account(
            s, actor=DEMO_ACTOR, username=username, name=name, role=role,
            password=demo_password(username),
            station=scene.stations[station] if station else None)
        scene.people[username] = person
    assert scene.allocation is not None
    allocations.add_member(s, actor=DEMO_ACTOR, allocation=scene.allocation,
                           person=scene.people["demo-analyst"], role="analyst")
