"""Files, images and labels in a real browser: upload an image, see its thumbnail and the
preview with its scale bar from the item page, open the label page and press Print."""

from __future__ import annotations

import io
import re
from pathlib import Path
from typing import Any

import pytest
import zxingcpp
from PIL import Image

from tests.e2e.conftest import Scene
from tests.services.test_images import gradient16

pytestmark = pytest.mark.browser


def test_upload_image_then_thumbnail_and_scale_bar(page: Any, scene: Scene,
                                                   tmp_path: Path) -> None:
    tif = tmp_path / "needle-apex.tif"
    gradient16(600, 400).save(tif, "TIFF")
    page.goto(f"/items/{scene.needle}")
    page.get_by_role("link", name="Add data files and images").first.click()
    page.wait_for_url(f"**/items/{scene.needle}/files")
    form = page.locator("#form-image")
    form.get_by_label("Operator").select_option("opa")
    form.get_by_label("Image (TIFF, PNG or JPEG)").set_input_files(str(tif))
    form.get_by_label("Pixel size (nm)").fill("5")
    form.get_by_role("button", name="Upload an image").click()
    page.wait_for_url(re.compile(r"/files#files$"))
    assert "needle-apex.tif" in page.locator(".flash").inner_text()

    page.goto(f"/items/{scene.needle}")
    thumb = page.get_by_role("img", name=re.compile("Thumbnail of needle-apex.tif"))
    thumb.wait_for()
    assert page.evaluate("(img) => img.complete && img.naturalWidth", thumb.element_handle()) \
        == 256
    assert "5 nm (as entered)" in page.locator("#files").inner_text()
    thumb.click()
    page.wait_for_url(re.compile(r"/files/\d+$"))
    shown_img = page.get_by_role("img", name=re.compile("with a scale bar"))
    assert page.evaluate("(img) => img.complete && img.naturalWidth",
                         shown_img.element_handle()) == 600
    assert "5 nm (as entered)" in page.locator("figcaption").inner_text()
    preview = page.request.get(shown_img.get_attribute("src"))
    assert preview.headers["content-type"] == "image/png"
    with Image.open(io.BytesIO(preview.body())) as shown:
        # 600 px at 5 nm = 3 µm wide; a fifth is 600 nm, so the bar is 500 nm = 100 pixels.
        runs = [longest_white_run([shown.getpixel((x, y)) for x in range(shown.width)])
                for y in range(shown.height - 30, shown.height)]
        assert max(runs) == 100


def longest_white_run(row: list[int]) -> int:
    """The longest run of pure white pixels in a row (the bar, not the image's own white)."""
    best = run = 0
    for value in row:
        run = run + 1 if value == 255 else 0
        best = max(best, run)
    return best


def test_label_page_prints(page: Any, scene: Scene) -> None:
    page.goto(f"/items/{scene.lamella}")
    page.get_by_role("link", name="Print label").click()
    page.wait_for_url(f"**/items/{scene.lamella}/label")
    label = page.get_by_role("img", name=re.compile(f"QR code holding {scene.lamella}"))
    assert page.evaluate("(img) => img.complete && img.naturalWidth", label.element_handle()) > 0
    png = page.request.get(label.get_attribute("src"))
    with Image.open(io.BytesIO(png.body())) as picture:
        assert [r.text for r in zxingcpp.read_barcodes(picture)] == [scene.lamella]
    # The button calls window.print() from the app's own script (no inline script allowed).
    page.evaluate("window.print = () => { document.body.dataset.printed = 'yes'; }")
    button = page.get_by_role("button", name="Print label")
    button.focus()
    page.keyboard.press("Enter")
    assert page.evaluate("document.body.dataset.printed") == "yes"
    size = page.evaluate("(b) => [b.offsetWidth, b.offsetHeight]", button.element_handle())
    assert min(size) >= 44
