"""Images among the data files: upload one, keep its thumbnail and scaled preview.

The thumbnail and the preview are PNG files in the data folder named by their own SHA-256,
so the database row says exactly which bytes were shown.
"""

from __future__ import annotations

import hashlib
import math
from pathlib import Path
from typing import BinaryIO

from sqlalchemy import select
from sqlalchemy.orm import Session

from curation import ledger
from curation.errors import InvalidInput
from curation.model import DataFile, Event, Image, Item, Person
from curation.services import files, imaging

TIFF_TAGS, ENTERED = "tiff-tags", "entered"


def _keep_png(data: bytes, kind: str, home: Path | None) -> str:
    sha = hashlib.sha256(data).hexdigest()
    target = files.store_folder(kind, home) / f"{sha}.png"
    if not target.exists():
        target.write_bytes(data)
    return sha


def rendition_path(kind: str, sha256: str, home: Path | None = None) -> Path:
    """Where the thumbnail or preview with this hash is kept."""
    if kind not in ("thumbnails", "previews") or len(sha256) != 64 or not all(
            c in "0123456789abcdef" for c in sha256):
        raise InvalidInput("rendition", f"{kind}/{sha256}", "thumbnails or previews by SHA-256")
    return files.store_folder(kind, home) / f"{sha256}.png"


def _pixel_size(tagged: float | None, entered: float | None) -> tuple[float | None, str | None]:
    """The TIFF tags' pixel size when present, else the one entered, with where it came from."""
    if entered is not None and not (math.isfinite(entered) and entered > 0):
        raise InvalidInput("pixel_size_nm", entered, "a pixel size above 0 nm")
    if tagged is not None:
        return tagged, TIFF_TAGS
    return (entered, ENTERED) if entered is not None else (None, None)


def add_image(
    session: Session, *, actor: Person, item: Item, stream: BinaryIO, original_name: str,
    pixel_size_nm: float | None = None, technique: str | None = None,
    step: Event | None = None, home: Path | None = None,
) -> Image:
    """Upload an image (TIFF, PNG or JPEG) with its thumbnail and scale-barred preview."""
    ledger.attribute(session, actor)
    files.check_name(original_name)
    _pixel_size(None, pixel_size_nm)
    received = files.receive(stream, home)
    try:
        with imaging.opened(received.temp, original_name) as picture:
            found = imaging.facts(picture)
            size_nm, source = _pixel_size(found.tag_pixel_size_nm, pixel_size_nm)
            thumb = _keep_png(imaging.png_bytes(imaging.thumbnail(picture)), "thumbnails", home)
            shown = _keep_png(imaging.png_bytes(imaging.preview(picture, size_nm)), "previews",
                              home)
    except BaseException:
        received.temp.unlink(missing_ok=True)
        raise
    data_file = files.keep_upload(session, actor=actor, item=item, received=received,
                                  original_name=original_name, technique=technique, step=step,
                                  home=home)
    existing = session.scalar(select(Image).where(Image.data_file_id == data_file.id))
    if existing is not None:
        return existing
    image = Image(data_file_id=data_file.id, width_px=found.width_px, height_px=found.height_px,
                  bit_depth=found.bit_depth, mode=found.mode, pixel_size_nm=size_nm,
                  pixel_size_source=source, thumbnail_sha256=thumb, preview_sha256=shown)
    session.add(image)
    session.flush()
    return image


def images_of(session: Session, data_file_ids: list[int]) -> dict[int, Image]:
    """The image rows of these data files, by data file id, in one query."""
    rows = session.scalars(select(Image).where(Image.data_file_id.in_(sorted(data_file_ids))))
    return {i.data_file_id: i for i in rows}


def files_with_images(session: Session, item_id: int) -> list[tuple[DataFile, Image | None]]:
    """An item's data files, each with its image row when it is one; two queries."""
    found = files.files_of(session, [item_id])
    by_file = images_of(session, [f.id for f in found])
    return [(f, by_file.get(f.id)) for f in found]
