"""The Flask app on the test's connection, and its test client."""

from __future__ import annotations

from typing import Any

import pytest
from flask import Flask
from flask.testing import FlaskClient
from sqlalchemy.orm import Session

from curation import create_app
from curation.model import Person
from curation.services import accounts


@pytest.fixture
def app(connection: Any) -> Flask:
    """The app on the test's connection: its sessions nest inside the test's transaction.

    Form tokens are off here; tests/web/test_custody.py proves a POST without one is refused.
    """
    return create_app({"DB_BIND": connection, "TESTING": True, "SECRET_KEY": "t",
                       "WTF_CSRF_ENABLED": False})


def account(session: Session, username: str, role: str, **extra: Any) -> Person:
    """A person with a login role (no password: tests log in with `logged_in`)."""
    person = accounts.add_person(session, actor="test", username=username, name=username.title())
    person.role = role
    for name, value in extra.items():
        setattr(person, name, value)
    session.flush()
    return person


def logged_in(app: Flask, person: Person) -> FlaskClient:
    """A test client whose session belongs to `person`, as after a login."""
    client = app.test_client()
    with client.session_transaction() as cookie:
        cookie["user_id"] = person.id
    return client


@pytest.fixture
def admin(session: Session) -> Person:
    """An administrator account."""
    return account(session, "web-admin", "admin")


@pytest.fixture
def client(app: Flask, admin: Person) -> FlaskClient:
    """A test client of the app, logged in as an administrator."""
    return logged_in(app, admin)
