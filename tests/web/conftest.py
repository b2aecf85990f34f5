"""The Flask app on the test's connection, and its test client."""

from __future__ import annotations

from typing import Any

import pytest
from flask import Flask
from flask.testing import FlaskClient

from curation import create_app


@pytest.fixture
def app(connection: Any) -> Flask:
    """The app on the test's connection: its sessions nest inside the test's transaction.

    Form tokens are off here; tests/web/test_custody.py proves a POST without one is refused.
    """
    return create_app({"DB_BIND": connection, "TESTING": True, "SECRET_KEY": "t",
                       "WTF_CSRF_ENABLED": False})


@pytest.fixture
def client(app: Flask) -> FlaskClient:
    """A test client of the app."""
    return app.test_client()
