"""Item labels: a QR code holding the item code, the code in print, and one short line.

Sheets are drawn with Pillow at 300 dpi and written as PNG (one image) or PDF (A4 pages,
Pillow's own PDF writer), chosen by the file's suffix.
"""

from __future__ import annotations

import io
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import segno
from PIL import Image, ImageDraw, ImageFont
from sqlalchemy import select
from sqlalchemy.orm import Session

from curation.errors import InvalidInput, NotFound
from curation.model import Derivation, Item

DPI = 300
#: one label, 300 dpi: about 64 × 25 mm
LABEL_W, LABEL_H = 760, 300
#: QR modules in pixels (about 0.25 mm at 300 dpi: phone and hand scanners read it)
MODULE_PX = 6
COLUMNS, ROWS_PER_PAGE = 3, 11
#: A4 at 300 dpi
PAGE_W, PAGE_H = 2480, 3508
SUFFIXES = (".png", ".pdf")


@dataclass(frozen=True)
class Label:
    """What one label shows."""

    code: str
    line: str


def line_for(item: Item, parent: str | None) -> str:
    """The short human-readable line: kind, material, and the parent it was cut from."""
    words = [item.kind, item.material, f"from {parent}" if parent else ""]
    return " · ".join(w for w in words if w)[:60]


def labels_for(session: Session, codes: Sequence[str]) -> list[Label]:
    """Labels for these codes in the order given; NotFound names every unknown code."""
    found = {i.code: i for i in session.scalars(select(Item).where(Item.code.in_(codes)))}
    unknown = [c for c in codes if c not in found]
    if unknown:
        raise NotFound("no item with code " + ", ".join(repr(c) for c in unknown))
    parents = dict(session.execute(
        select(Derivation.child_id, Item.code).join(Item, Item.id == Derivation.parent_id)
        .where(Derivation.child_id.in_([i.id for i in found.values()]))
        .order_by(Derivation.derived_at.desc())).all())
    return [Label(c, line_for(found[c], parents.get(found[c].id))) for c in codes]


def qr_image(code: str) -> Image.Image:
    """The QR code of an item code (error correction M, the standard quiet zone of 4)."""
    out = io.BytesIO()
    segno.make_qr(code, error="m", boost_error=False).save(out, kind="png", scale=MODULE_PX,
                                                          border=4)
    out.seek(0)
    with Image.open(out) as picture:
        return picture.convert("L")


def _fitting_font(draw: ImageDraw.ImageDraw, text: str, width: int, size: int
                  ) -> ImageFont.FreeTypeFont | ImageFont.ImageFont:
    """The default font at the largest size up to `size` at which `text` fits `width`."""
    while True:
        font = ImageFont.load_default(size=size)
        if size <= 12 or draw.textlength(text, font=font) <= width:
            return font
        size -= 2


def label_image(label: Label) -> Image.Image:
    """One label: the QR code on the left, the code and the line on the right."""
    image = Image.new("L", (LABEL_W, LABEL_H), 255)
    qr = qr_image(label.code)
    if qr.height > LABEL_H:
        qr = qr.resize((LABEL_H, LABEL_H), Image.Resampling.NEAREST)
    image.paste(qr, (0, (LABEL_H - qr.height) // 2))
    draw = ImageDraw.Draw(image)
    left, room = qr.width + 8, LABEL_W - qr.width - 20
    draw.text((left, 70), label.code, fill=0,
              font=_fitting_font(draw, label.code, room, 48), anchor="lm")
    draw.text((left, 150), label.line, fill=0,
              font=_fitting_font(draw, label.line, room, 28), anchor="lm")
    # A thin frame is the cutting guide on a sheet.
    draw.rectangle((0, 0, LABEL_W - 1, LABEL_H - 1), outline=160)
    return image


def sheet_pages(labels: Sequence[Label], rows_per_page: int | None = ROWS_PER_PAGE
                ) -> list[Image.Image]:
    """Labels in a grid of COLUMNS; pages of `rows_per_page` rows (None: one long page)."""
    if not labels:
        raise InvalidInput("codes", [], "at least one item code")
    per_page = len(labels) if rows_per_page is None else COLUMNS * rows_per_page
    pages = []
    for start in range(0, len(labels), per_page):
        chunk = labels[start:start + per_page]
        rows = -(-len(chunk) // COLUMNS)
        height = PAGE_H if rows_per_page is not None else rows * LABEL_H + 2 * 60
        page = Image.new("L", (PAGE_W, height), 255)
        for n, label in enumerate(chunk):
            col, row = n % COLUMNS, n // COLUMNS
            page.paste(label_image(label), (60 + col * (LABEL_W + 20), 60 + row * LABEL_H))
        pages.append(page)
    return pages


def write_sheet(labels: Sequence[Label], path: Path) -> Path:
    """Write a label sheet: PNG (one image) or PDF (A4 pages), from the suffix."""
    suffix = path.suffix.lower()
    if suffix not in SUFFIXES:
        raise InvalidInput("output", str(path), "a file name ending in .png or .pdf")
    if suffix == ".png":
        sheet_pages(labels, rows_per_page=None)[0].save(path, "PNG", dpi=(DPI, DPI))
    else:
        first, *rest = sheet_pages(labels)
        first.save(path, "PDF", resolution=DPI, save_all=True, append_images=rest)
    return path


def label_png(label: Label) -> bytes:
    """One label as PNG bytes, for the print page."""
    out = io.BytesIO()
    label_image(label).save(out, "PNG", dpi=(DPI, DPI))
    return out.getvalue()
