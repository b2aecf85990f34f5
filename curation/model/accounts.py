"""People: operators, custodians, curators, investigators."""

from __future__ import annotations

from datetime import datetime

from sqlalchemy import String
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

    def __repr__(self) -> str:
        return f"<Person {self.username}>"
