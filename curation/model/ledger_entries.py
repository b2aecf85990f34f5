"""The ledger's table: one hash-chained entry per write."""

from __future__ import annotations

from datetime import datetime

from sqlalchemy import Index, String, Text
from sqlalchemy.orm import Mapped, mapped_column

from curation.db import Base


class LedgerEntry(Base):
    """One write: which row, what action, its new state, who, when, and the chain hashes."""

    __tablename__ = "ledger"
    __table_args__ = (Index("ix_ledger_row", "table_name", "row_id", "seq"),)

    #: 1, 2, 3, ... with no gaps
    seq: Mapped[int] = mapped_column(primary_key=True, autoincrement=False)
    table_name: Mapped[str] = mapped_column(String(64))
    row_id: Mapped[str] = mapped_column(String(64))
    #: "insert" or "update"
    action: Mapped[str] = mapped_column(String(16))
    #: the row's new state, canonical JSON (RFC 8785)
    state: Mapped[str] = mapped_column(Text)
    actor: Mapped[str] = mapped_column(String(64))
    recorded_at: Mapped[datetime]
    #: SHA-256 (hex) of the previous entry; 64 zeros for the first
    prev_hash: Mapped[str] = mapped_column(String(64))
    #: SHA-256 (hex) of this entry's canonical content, prev_hash included
    hash: Mapped[str] = mapped_column(String(64), unique=True)

    def __repr__(self) -> str:
        return f"<LedgerEntry {self.seq} {self.action} {self.table_name}/{self.row_id}>"
