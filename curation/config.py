"""Settings from environment variables, with defaults in code."""

from __future__ import annotations

import os
from collections.abc import Mapping
from pathlib import Path

import platformdirs

#: Environment variables the application reads, with what they mean.
ENVIRONMENT = {
    "CURATION_DATABASE_URL": "SQLAlchemy URL of the database (default: SQLite file in CURATION_HOME)",
    "CURATION_HOME": "data folder for the default SQLite databases (default: per-user data folder)",
    "CURATION_SECRET_KEY": "secret key for signed cookies and CSRF tokens",
    "CURATION_ENV": "'production' refuses to start without a strong CURATION_SECRET_KEY",
    "CURATION_SECURE_COOKIES": "'1' sends the session cookie only over HTTPS (behind TLS)",
    "CURATION_DATA_ROOTS": "folders (separated like PATH) where registered data files must lie",
}


def data_roots(environ: Mapping[str, str] | None = None) -> list[Path]:
    """The folders registered paths must lie in (CURATION_DATA_ROOTS); empty when unset."""
    environ = os.environ if environ is None else environ
    return [Path(p) for p in environ.get("CURATION_DATA_ROOTS", "").split(os.pathsep)
            if p.strip()]


def home(environ: Mapping[str, str] | None = None) -> Path:
    """The data folder: CURATION_HOME, or the per-user data folder."""
    environ = os.environ if environ is None else environ
    folder = environ.get("CURATION_HOME") or platformdirs.user_data_dir("curation", appauthor=False)
    return Path(folder)


def sqlite_url(path: Path) -> str:
    """An SQLAlchemy URL for an SQLite file."""
    return f"sqlite:///{path}"


def database_url(environ: Mapping[str, str] | None = None) -> str:
    """The main database: CURATION_DATABASE_URL, or curation.db in the data folder."""
    environ = os.environ if environ is None else environ
    return environ.get("CURATION_DATABASE_URL") or sqlite_url(home(environ) / "curation.db")


def demo_database_url(environ: Mapping[str, str] | None = None) -> str:
    """The demo database: CURATION_DATABASE_URL, or demo.db in the data folder."""
    environ = os.environ if environ is None else environ
    return environ.get("CURATION_DATABASE_URL") or sqlite_url(home(environ) / "demo.db")


def secret_key(environ: Mapping[str, str] | None = None) -> str | None:
    """The configured secret key, if any."""
    environ = os.environ if environ is None else environ
    return environ.get("CURATION_SECRET_KEY")


def environment_name(environ: Mapping[str, str] | None = None) -> str:
    """CURATION_ENV: 'production', or 'development' when unset."""
    environ = os.environ if environ is None else environ
    return environ.get("CURATION_ENV", "development").strip().lower()


def secure_cookies(environ: Mapping[str, str] | None = None) -> bool:
    """Whether the session cookie is marked Secure (CURATION_SECURE_COOKIES=1, or production)."""
    environ = os.environ if environ is None else environ
    flag = environ.get("CURATION_SECURE_COOKIES", "").strip().lower()
    return flag in ("1", "true", "yes") or (flag == "" and environment_name(environ) == "production")
