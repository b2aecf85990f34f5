"""Data files (left where instruments write them, or uploaded) and the images among them."""

from __future__ import annotations

from datetime import datetime

from sqlalchemy import BigInteger, Double, ForeignKey, String
from sqlalchemy.orm import Mapped, mapped_column, relationship

from curation.db import Base, utcnow
from curation.model.accounts import Person
from curation.model.events import Event
from curation.model.items import Item


class DataFile(Base):
    """A file an instrument wrote: where it is, its size and SHA-256, what made it."""

    __tablename__ = "data_files"

    id: Mapped[int] = mapped_column(primary_key=True)
    item_id: Mapped[int] = mapped_column(ForeignKey("items.id"), index=True)
    #: the step that produced it, if known
    event_id: Mapped[int | None] = mapped_column(ForeignKey("events.id"), index=True)
    #: absolute path on the instrument share, or in the upload store for uploads
    path: Mapped[str] = mapped_column(String(1000))
    original_name: Mapped[str] = mapped_column(String(300))
    #: bytes
    size_bytes: Mapped[int] = mapped_column(BigInteger)
    #: hex SHA-256 of the content
    sha256: Mapped[str] = mapped_column(String(64), index=True)
    #: the file's modification time when registered
    modified_at: Mapped[datetime | None]
    technique: Mapped[str | None] = mapped_column(String(64))
    media_type: Mapped[str] = mapped_column(String(100), default="application/octet-stream")
    is_upload: Mapped[bool] = mapped_column(default=False)
    actor_id: Mapped[int] = mapped_column(ForeignKey("people.id"))
    registered_at: Mapped[datetime] = mapped_column(default=utcnow)

    item: Mapped[Item] = relationship()
    event: Mapped[Event | None] = relationship()
    actor: Mapped[Person] = relationship()

    def __repr__(self) -> str:
        return f"<DataFile {self.original_name} {self.sha256[:12]}>"


class Image(Base):
    """An image among the data files, with the thumbnail and scaled preview made from it."""

    __tablename__ = "images"

    id: Mapped[int] = mapped_column(primary_key=True)
    data_file_id: Mapped[int] = mapped_column(ForeignKey("data_files.id"), unique=True)
    width_px: Mapped[int]
    height_px: Mapped[int]
    #: bits per sample of the original (8 or 16)
    bit_depth: Mapped[int]
    #: Pillow mode of the original, e.g. "L", "I;16", "RGB"
    mode: Mapped[str] = mapped_column(String(16))
    #: nanometres per pixel, for the scale bar
    pixel_size_nm: Mapped[float | None] = mapped_column(Double)
    #: "tiff-tags" or "entered"
    pixel_size_source: Mapped[str | None] = mapped_column(String(16))
    #: SHA-256 of the PNG thumbnail and preview kept in the data folder (named by their hash)
    thumbnail_sha256: Mapped[str] = mapped_column(String(64))
    preview_sha256: Mapped[str] = mapped_column(String(64))
    created_at: Mapped[datetime] = mapped_column(default=utcnow)

    data_file: Mapped[DataFile] = relationship()

    def __repr__(self) -> str:
        return f"<Image {self.width_px}x{self.height_px} of file {self.data_file_id}>"
