"""Images: 8- and 16-bit uploads, thumbnails rescaled not clipped, pixel size, scale bar, bombs."""

from __future__ import annotations

import io
import struct
import zlib
from collections.abc import Callable
from pathlib import Path

import pytest
from PIL import Image as PILImage
from PIL import TiffImagePlugin
from sqlalchemy.orm import Session

from curation.errors import InvalidInput
from curation.model import Item, Person
from curation.services import images, imaging


def gradient16(width: int = 200, height: int = 50, low: int = 1000, high: int = 3000
               ) -> PILImage.Image:
    """A 16-bit left-to-right gradient made in memory."""
    picture = PILImage.new("I;16", (width, height))
    row = [low + (high - low) * x // (width - 1) for x in range(width)]
    picture.putdata(row * height)
    return picture


def encoded(picture: PILImage.Image, fmt: str, **options: object) -> io.BytesIO:
    out = io.BytesIO()
    picture.save(out, fmt, **options)
    out.seek(0)
    return out


def _add(session: Session, operator: Person, item: Item, data: io.BytesIO, name: str,
         home: Path, **extra: object) -> images.Image:
    return images.add_image(session, actor=operator, item=item, stream=data,
                            original_name=name, home=home, **extra)


def _rendition(home: Path, kind: str, sha: str) -> PILImage.Image:
    return PILImage.open(images.rendition_path(kind, sha, home))


def test_16bit_tiff_thumbnail_is_rescaled_by_its_own_range_not_clipped(
        session: Session, operator: Person, make_item: Callable[..., Item],
        tmp_path: Path) -> None:
    row = _add(session, operator, make_item(), encoded(gradient16(), "TIFF"), "g16.tif",
               tmp_path)
    assert (row.bit_depth, row.mode, row.width_px, row.height_px) == (16, "I;16", 200, 50)
    with _rendition(tmp_path, "thumbnails", row.thumbnail_sha256) as thumb:
        assert thumb.mode == "L"
        # Clipping at 255 would make every pixel white; dividing by 65535/255 would leave a
        # dim band (4 to 12). Rescaling by the image's own 1000..3000 spans the full 0..255.
        assert thumb.getextrema() == (0, 255)
        line = [thumb.getpixel((x, thumb.height // 2)) for x in range(thumb.width)]
        assert line == sorted(line) and len(set(line)) > 100


def test_to_8bit_maps_min_to_black_and_max_to_white_linearly() -> None:
    picture = PILImage.new("I;16", (3, 1))
    picture.putdata([1000, 2000, 3000])
    shown = imaging.to_8bit(picture)
    assert [shown.getpixel((x, 0)) for x in range(3)] == [0, 127, 255] or \
        [shown.getpixel((x, 0)) for x in range(3)] == [0, 128, 255]
    flat = PILImage.new("I;16", (4, 4), 500)
    assert imaging.to_8bit(flat).getextrema() == (0, 0)


def test_tiff_resolution_tags_give_the_pixel_size(
        session: Session, operator: Person, make_item: Callable[..., Item],
        tmp_path: Path) -> None:
    # TIFF 6.0: ResolutionUnit 3 is the centimetre; 1e5 pixels per cm = 100 nm per pixel.
    tags = TiffImagePlugin.ImageFileDirectory_v2()
    tags[282], tags[283], tags[296] = 100000.0, 100000.0, 3
    row = _add(session, operator, make_item(),
               encoded(PILImage.new("L", (400, 300), 90), "TIFF", tiffinfo=tags), "t.tif",
               tmp_path, pixel_size_nm=7.0)
    assert row.pixel_size_nm == pytest.approx(100.0) and row.pixel_size_source == "tiff-tags"
    assert row.bit_depth == 8


def test_entered_pixel_size_without_tags(session: Session, operator: Person,
                                         make_item: Callable[..., Item], tmp_path: Path) -> None:
    png = _add(session, operator, make_item(), encoded(PILImage.new("RGB", (64, 48)), "PNG"),
               "a.png", tmp_path, pixel_size_nm=2.5)
    jpeg = _add(session, operator, make_item(),
                encoded(PILImage.new("RGB", (64, 48), (200, 10, 10)), "JPEG"), "b.jpg", tmp_path)
    assert (png.pixel_size_nm, png.pixel_size_source) == (2.5, "entered")
    assert (jpeg.pixel_size_nm, jpeg.pixel_size_source, jpeg.bit_depth) == (None, None, 8)


@pytest.mark.parametrize(("target", "nice"), [
    (1.0, 1), (1.9, 1), (2.0, 2), (4.99, 2), (5.0, 5), (9.99, 5), (10.0, 10), (0.037, 0.02),
    (2345.0, 2000), (78_000.0, 50_000)])
def test_nice_lengths_are_1_2_5_times_a_power_of_ten(target: float, nice: float) -> None:
    # The 1-2-5 series of scale bars and chart axes (common practice, from memory).
    assert imaging.nice_length(target) == pytest.approx(nice)


@pytest.mark.parametrize(("nm", "label"), [(500, "500 nm"), (2000, "2 µm"), (50_000, "50 µm"),
                                           (1e6, "1 mm"), (0.5, "0.5 nm")])
def test_length_labels(nm: float, label: str) -> None:
    assert imaging.length_label(nm) == label


def test_preview_scale_bar_is_as_long_as_its_label_says(
        session: Session, operator: Person, make_item: Callable[..., Item],
        tmp_path: Path) -> None:
    # 2000 px at 10 nm is 20 µm wide; the preview halves it to 1000 px at 20 nm per pixel;
    # a fifth of the width is 4 µm, so the bar is 2 µm: 2000 nm / 20 nm = 100 preview pixels.
    row = _add(session, operator, make_item(), encoded(PILImage.new("L", (2000, 1000), 0),
                                                       "PNG"), "dark.png", tmp_path,
               pixel_size_nm=10.0)
    with _rendition(tmp_path, "previews", row.preview_sha256) as shown:
        assert shown.size == (1024, 512)
        # 1024 px at 2000/1024 × 10 nm: a fifth is 4 µm again, so the bar stays 2 µm.
        bar_rows = [[x for x in range(shown.width) if shown.getpixel((x, y)) == 255]
                    for y in range(shown.height - 40, shown.height)]
        longest = max((len(r) for r in bar_rows), default=0)
    assert longest == round(2000 / (10.0 * 2000 / 1024))


def _png_header_only(width: int, height: int) -> bytes:
    """A PNG whose header claims a huge image (PNG spec: signature, IHDR, IDAT, IEND)."""
    def chunk(kind: bytes, data: bytes) -> bytes:
        return struct.pack(">I", len(data)) + kind + data + struct.pack(
            ">I", zlib.crc32(kind + data))

    ihdr = struct.pack(">IIBBBBB", width, height, 8, 0, 0, 0, 0)
    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr)
            + chunk(b"IDAT", zlib.compress(b"\x00")) + chunk(b"IEND", b""))


def test_decompression_bomb_is_refused(session: Session, operator: Person,
                                       make_item: Callable[..., Item], tmp_path: Path) -> None:
    with pytest.raises(InvalidInput, match="at most .* pixels") as refused:
        _add(session, operator, make_item(), io.BytesIO(_png_header_only(100_000, 100_000)),
             "bomb.png", tmp_path)
    assert refused.value.field == "file"
    assert not any((tmp_path / "uploads").iterdir())


def test_image_over_the_warning_size_is_refused(
        session: Session, operator: Person, make_item: Callable[..., Item], tmp_path: Path,
        monkeypatch: pytest.MonkeyPatch) -> None:
    # Between MAX_IMAGE_PIXELS and twice that, Pillow only warns: we refuse all the same.
    monkeypatch.setattr(PILImage, "MAX_IMAGE_PIXELS", 1000)
    with pytest.raises(InvalidInput, match="at most 1,000 pixels"):
        _add(session, operator, make_item(), encoded(PILImage.new("L", (40, 40)), "PNG"),
             "big.png", tmp_path)


@pytest.mark.parametrize(("data", "said"), [
    (b"time,counts\n0,1\n", "that can be read"),
    (encoded(PILImage.new("P", (8, 8)), "GIF").getvalue(), "not GIF"),
    (encoded(PILImage.effect_noise((64, 64), 60), "PNG").getvalue()[:300], "that can be read"),
])
def test_non_images_are_refused(data: bytes, said: str, session: Session,
                                operator: Person, make_item: Callable[..., Item],
                                tmp_path: Path) -> None:
    with pytest.raises(InvalidInput, match=said):
        _add(session, operator, make_item(), io.BytesIO(data), "x.png", tmp_path)
    assert not any((tmp_path / "uploads").iterdir())


def test_bad_pixel_size_is_refused(session: Session, operator: Person,
                                   make_item: Callable[..., Item], tmp_path: Path) -> None:
    with pytest.raises(InvalidInput) as refused:
        _add(session, operator, make_item(), encoded(PILImage.new("L", (8, 8)), "PNG"), "a.png",
             tmp_path, pixel_size_nm=-1.0)
    assert refused.value.field == "pixel_size_nm"
