"""Labels: every QR code decodes back to its item code with zxing-cpp, also scaled and rotated."""

from __future__ import annotations

import re
from collections.abc import Callable
from pathlib import Path

import pytest
import zxingcpp
from PIL import Image
from sqlalchemy.orm import Session

from curation.errors import InvalidInput, NotFound
from curation.model import Item, Person
from curation.reports import labels
from curation.services import items as item_writes
from tests.conftest import hours

CODES = ["PX-1", "PX-1-L1-N3", "kr.0302_w1", "A" * 64, "blank-2026-03-02-07"]


def decoded(picture: Image.Image) -> list[str]:
    """Texts of the QR codes zxing-cpp (an independent reader) finds in a picture."""
    return sorted(r.text for r in zxingcpp.read_barcodes(picture)
                  if r.format == zxingcpp.BarcodeFormat.QRCode)


@pytest.mark.parametrize("code", CODES)
def test_each_label_decodes_to_its_code_scaled_and_rotated(code: str) -> None:
    # REFERENCES.md: decode with zxing-cpp, also after scaling to 1/3 and rotating 90°.
    picture = labels.label_image(labels.Label(code, "needle · olivine · from PX-1-L1"))
    third = picture.resize((picture.width // 3, picture.height // 3), Image.Resampling.LANCZOS)
    for variant in (picture, third, picture.rotate(90, expand=True),
                    third.rotate(90, expand=True)):
        assert decoded(variant) == [code]


def test_png_sheet_holds_every_code(tmp_path: Path) -> None:
    sheet = [labels.Label(c, "fragment") for c in CODES * 3]
    path = labels.write_sheet(sheet, tmp_path / "sheet.PNG")
    with Image.open(path) as picture:
        assert picture.info["dpi"] == pytest.approx((300, 300), rel=1e-4)
        found = decoded(picture)
    assert sorted(found) == sorted(c for c in CODES * 3)


def test_pdf_sheet_has_a4_pages(tmp_path: Path) -> None:
    per_page = labels.COLUMNS * labels.ROWS_PER_PAGE
    sheet = [labels.Label(f"N-{n}", "needle") for n in range(per_page + 1)]
    data = labels.write_sheet(sheet, tmp_path / "sheet.pdf").read_bytes()
    assert data.startswith(b"%PDF-") and data.count(b"/Type /Page\n") == 2
    # ISO 216: A4 is 210 × 297 mm, i.e. 595.28 × 841.89 pt at 72 pt per inch.
    boxes = re.findall(rb"/MediaBox \[ 0 0 ([\d.]+) ([\d.]+) \]", data)
    assert len(boxes) == 2
    for width, height in boxes:
        assert float(width) == pytest.approx(210 / 25.4 * 72, abs=0.5)
        assert float(height) == pytest.approx(297 / 25.4 * 72, abs=0.5)


def test_other_suffixes_and_empty_sheets_are_refused(tmp_path: Path) -> None:
    with pytest.raises(InvalidInput, match=".png or .pdf"):
        labels.write_sheet([labels.Label("A", "")], tmp_path / "sheet.svg")
    with pytest.raises(InvalidInput, match="at least one"):
        labels.write_sheet([], tmp_path / "sheet.png")


def test_labels_for_items_carry_kind_material_and_parent(
        session: Session, operator: Person, make_item: Callable[..., Item]) -> None:
    parent = make_item(code="LB-P", material="olivine")
    child = make_item(code="LB-P-L1", kind="lamella", material="olivine", created_at=hours(2))
    item_writes.derive(session, actor=operator, parent=parent, child=child, derived_at=hours(2))
    found = labels.labels_for(session, ["LB-P-L1", "LB-P"])
    assert found == [labels.Label("LB-P-L1", "lamella · olivine · from LB-P"),
                     labels.Label("LB-P", "particle · olivine")]
    with pytest.raises(NotFound, match="'NOPE-1', 'NOPE-2'"):
        labels.labels_for(session, ["LB-P", "NOPE-1", "NOPE-2"])
