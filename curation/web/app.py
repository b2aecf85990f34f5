"""The Flask application: settings, one database session per request, errors, headers."""

from __future__ import annotations

import gc
import secrets
import threading
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from flask import Flask, Response, current_app, g, render_template, request
from flask_wtf.csrf import CSRFProtect
from sqlalchemy import Engine
from sqlalchemy.orm import Session, sessionmaker
from werkzeug.exceptions import HTTPException, InternalServerError

from curation import config as settings
from curation.db import READ_ONLY, SQLITE_BUSY_TIMEOUT_MS, make_engine, make_sessionmaker
from curation.errors import CurationError, NotFound

#: sent with every response; scripts and styles only from our own static files
SECURITY_HEADERS = {
    "Content-Security-Policy": (
        "default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; "
        "object-src 'none'; base-uri 'none'; form-action 'self'; frame-ancestors 'none'"
    ),
    "X-Content-Type-Options": "nosniff",
    "X-Frame-Options": "DENY",
    "Referrer-Policy": "same-origin",
}


@dataclass
class Database:
    """Where the app's sessions come from; `engine` is None when the caller bound a connection."""

    engine: Engine | None
    sessions: sessionmaker[Session]
    #: SQLite lets one writer in at a time; this process's writing requests queue here and
    #: each is woken the moment the previous one ends, instead of polling SQLite's busy
    #: handler, which sleeps longer and longer between tries (up to 100 ms) and so lets the
    #: write lock sit idle while requests wait (None: not SQLite, or a caller's connection)
    writers: threading.Lock | None = None


def build_app(config: Mapping[str, Any] | None = None) -> Flask:
    """Build the application: defaults, then the environment, then `config` win."""
    app = Flask("curation", template_folder="templates", static_folder="static")
    app.config.update(_settings(config))
    app.extensions["curation"] = _database(app.config)
    app.after_request(_finish_transaction)
    app.after_request(_security_headers)
    app.teardown_request(_close_session)
    _register_error_pages(app)
    # Every POST must carry the form's token (tests may turn it off with WTF_CSRF_ENABLED).
    csrf = CSRFProtect(app)
    # Imported here, as in the Flask tutorial: the blueprints import db_session from this module.
    from curation.web import custody, findings, items

    app.register_blueprint(items.bp)
    app.register_blueprint(custody.bp)
    app.register_blueprint(findings.bp)
    from curation.web import stations

    app.register_blueprint(stations.bp)
    from curation.web import api, files

    app.register_blueprint(files.bp)
    # Scripts authenticate with a station's bearer token, which browsers never send by themselves.
    csrf.exempt(api.bp)
    app.register_blueprint(api.bp)
    from curation.web import reports

    app.register_blueprint(reports.bp)
    from curation.web import controls

    app.register_blueprint(controls.bp)
    from curation.web import allocations

    app.register_blueprint(allocations.bp)
    from curation.web import auth

    auth.install(app)
    return app


def settle_for_serving() -> None:
    """Call once the application is built, before serving: moves everything made so far
    (modules, routes, mappers, the app) out of the garbage collector's reach.

    A page that loads a thousand-item family allocates enough to set off full collections,
    which otherwise walk every long-lived object each time: a GIL pause for every request.
    """
    gc.collect()
    gc.freeze()


def _settings(config: Mapping[str, Any] | None) -> dict[str, Any]:
    values: dict[str, Any] = {"TESTING": False, "DATABASE_URL": settings.database_url()}
    # A fresh key per start until accounts land: sessions do not survive a restart yet.
    values["SECRET_KEY"] = settings.secret_key() or secrets.token_hex(32)
    # Uploads (images, small data files) up to 256 MiB; larger files are registered by path.
    values["MAX_CONTENT_LENGTH"] = 256 * 1024 * 1024
    # Session cookie: never readable by scripts, not sent on cross-site posts.
    values.update(SESSION_COOKIE_HTTPONLY=True, SESSION_COOKIE_SAMESITE="Lax",
                  SESSION_COOKIE_SECURE=settings.secure_cookies())
    values.update(config or {})
    check_secret_key(values.get("CURATION_ENV") or settings.environment_name(),
                     (config or {}).get("SECRET_KEY") or settings.secret_key() or "")
    return values


#: shortest secret key accepted in production
MIN_SECRET_KEY = 32


def check_secret_key(environment: str, key: str) -> None:
    """Refuse to start in production (CURATION_ENV=production) without a strong secret key."""
    if environment != "production":
        return
    if len(key) < MIN_SECRET_KEY or len(set(key)) < 8:
        raise RuntimeError("CURATION_ENV=production needs CURATION_SECRET_KEY set to a random "
                           f"string of at least {MIN_SECRET_KEY} characters "
                           "(python -c 'import secrets; print(secrets.token_hex(32))')")


def _database(values: Mapping[str, Any]) -> Database:
    bind = values.get("DB_BIND")
    if bind is not None:
        # A caller's connection may already be inside a transaction (tests): nest in savepoints.
        return Database(None, make_sessionmaker(bind, join_transaction_mode="create_savepoint"))
    engine = make_engine(values["DATABASE_URL"])
    writers = threading.Lock() if engine.dialect.name == "sqlite" else None
    return Database(engine, make_sessionmaker(engine), writers)


def database(app: Flask) -> Database:
    """The app's database handle (engine and session factory)."""
    db: Database = app.extensions["curation"]
    return db


def db_session() -> Session:
    """The request's session, opened on first use; the request commits it once."""
    if "db_session" not in g:
        db = database(current_app)
        reads_only = request.method in ("GET", "HEAD")
        # Past the timeout, SQLite's own busy timeout decides, as for other processes.
        if not reads_only and db.writers is not None and db.writers.acquire(
                timeout=SQLITE_BUSY_TIMEOUT_MS / 1000):
            g.db_writer = db.writers
        g.db_session = db.sessions()
        if reads_only:
            # Pages only read: SQLite may begin DEFERRED and run beside a writer.
            g.db_session.connection(execution_options={READ_ONLY: True})
    session: Session = g.db_session
    return session


def _finish_transaction(response: Response) -> Response:
    session: Session | None = g.get("db_session")
    if session is not None:
        # Error pages are rendered by handlers, so the status code says whether to keep the work.
        try:
            if response.status_code < 400:
                session.commit()
            else:
                session.rollback()
        finally:
            # SQLite's write lock went with the transaction: let the next writer in now.
            _release_writer()
    return response


def _close_session(_exc: BaseException | None) -> None:
    session: Session | None = g.pop("db_session", None)
    try:
        if session is not None:
            session.close()
    finally:
        _release_writer()


def _release_writer() -> None:
    writer: threading.Lock | None = g.pop("db_writer", None)
    if writer is not None:
        writer.release()


def _security_headers(response: Response) -> Response:
    for name, value in SECURITY_HEADERS.items():
        response.headers.setdefault(name, value)
    return response


def _error_page(status: int, title: str, message: str) -> tuple[str, int]:
    return render_template("errors/error.html", status=status, title=title,
                           message=message), status


def _register_error_pages(app: Flask) -> None:
    @app.errorhandler(NotFound)
    def not_found(exc: NotFound) -> tuple[str, int]:
        return _error_page(404, "Not found", str(exc))

    @app.errorhandler(CurationError)
    def refused(exc: CurationError) -> tuple[str, int]:
        return _error_page(400, "Not accepted", str(exc))

    @app.errorhandler(HTTPException)
    def http_error(exc: HTTPException) -> tuple[str, int]:
        return _error_page(exc.code or 500, exc.name, exc.description or "")

    @app.errorhandler(InternalServerError)
    def server_error(_exc: InternalServerError) -> tuple[str, int]:
        return _error_page(500, "Something went wrong",
                           "The server could not finish this request; nothing was saved.")
