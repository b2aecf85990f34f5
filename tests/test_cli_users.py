"""`curation user add|disable|reset` and the first start's administrator."""

from __future__ import annotations

import json

import pytest
from sqlalchemy.orm import Session

from curation.db import make_engine
from curation.services import accounts
from curation.services.accounts import LoginRefused
from tests.test_cli import query, run, url_in


def _login(url: str, username: str, password: str) -> str:
    engine = make_engine(url)
    try:
        with Session(engine) as session:
            return accounts.authenticate(session, username, password).username
    finally:
        engine.dispose()


def test_add_disable_reset(tmp_path) -> None:
    url = url_in(tmp_path, "users.db")
    assert run("init", "--db", url).exit_code == 0
    added = run("user", "add", "kvale", "--name", "K. Vale", "--role", "curator", "--json",
                "--db", url)
    assert added.exit_code == 0, added.output
    password = json.loads(added.stdout)["password"]
    assert _login(url, "kvale", password) == "kvale"
    stored = query(url, "select password_hash from people where username = 'kvale'")[0][0]
    assert password not in stored and stored.startswith("$argon2id$v=19$m=19456,t=2,p=1$")
    assert run("user", "disable", "kvale", "--db", url).exit_code == 0
    with pytest.raises(LoginRefused):
        _login(url, "kvale", password)
    reset = run("user", "reset", "kvale", "--json", "--db", url)
    fresh = json.loads(reset.stdout)["password"]
    assert fresh != password and _login(url, "kvale", fresh) == "kvale"
    with pytest.raises(LoginRefused):
        _login(url, "kvale", password)
    assert run("ledger", "verify", "--db", url).exit_code == 0


def test_a_station_login_needs_its_station(tmp_path) -> None:
    url = url_in(tmp_path, "users.db")
    run("init", "--db", url)
    refused = run("user", "add", "pc1", "--name", "PC", "--role", "station", "--db", url)
    assert refused.exit_code != 0 and "station" in refused.output


def test_first_serve_prints_an_admin_password_once(tmp_path, monkeypatch) -> None:
    monkeypatch.setattr("waitress.serve", lambda app, **kw: None)
    monkeypatch.setattr("curation.create_app", lambda config: ("app", config))
    url = url_in(tmp_path, "fresh.db")
    run("init", "--db", url)
    first = run("serve", "--db", url)
    assert first.exit_code == 0, first.output
    password = first.stdout.split("(shown once):\n")[1].split("\n")[0]
    assert _login(url, "admin", password) == "admin"
    second = run("serve", "--db", url)
    assert "shown once" not in second.stdout and password not in second.stdout
