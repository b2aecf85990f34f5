"""People: operators, custodians, curators, investigators."""

from __future__ import annotations

from datetime import datetime

from sqlalchemy import ForeignKey, String
from sqlalchemy.orm import Mapped, mapped_column

from curation.db import Base, utcnow


class Person(Base):
    """Someone who handles, holds or records items."""

    __tablename__ = "people"

    id: Mapped[int] = mapped_column(primary_key=True)
    #: short login-style name, unique; what the ledger records as the actor
    username: Mapped[str] = mapped_column(String(64), unique=True)
    name: Mapped[str] = mapped_column(String(200))
    affiliation: Mapped[str] = mapped_column(String(200), default="")
    is_active: Mapped[bool] = mapped_column(default=True)
    created_at: Mapped[datetime] = mapped_column(default=utcnow)
    #: admin, curator, analyst, station or auditor; None: a person without a login
    role: Mapped[str | None] = mapped_column(String(16))
    #: Argon2id (or scrypt) hash of the password; never the password itself
    password_hash: Mapped[str | None] = mapped_column(String(300))
    password_changed_at: Mapped[datetime | None]
    #: a station account may write only for this station's instrument
    station_id: Mapped[int | None] = mapped_column(ForeignKey("stations.id"))

    def __repr__(self) -> str:
        return f"<Person {self.username}>"
