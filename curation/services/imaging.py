"""Pillow work for uploaded images: open safely, read the pixel size, thumbnail, scale bar.

Pure functions of an image (no database). Decompression bombs are refused rather than
opened: Pillow's size check is turned from a warning into a refusal.
"""

from __future__ import annotations

import io
import math
import warnings
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

from PIL import Image, ImageDraw, ImageFont, UnidentifiedImageError

from curation.errors import InvalidInput

#: formats accepted as images
FORMATS = ("TIFF", "PNG", "JPEG")
THUMBNAIL_PX = 256
PREVIEW_PX = 1024
#: TIFF tags (TIFF 6.0, section 8): XResolution, ResolutionUnit, BitsPerSample
X_RESOLUTION, RESOLUTION_UNIT, BITS_PER_SAMPLE = 282, 296, 258
#: nanometres per ResolutionUnit: 2 = inch, 3 = centimetre (1 = no absolute unit)
NM_PER_UNIT = {2: 2.54e7, 3: 1e7}


@dataclass(frozen=True)
class Facts:
    """What the original image is: size, depth, Pillow mode, pixel size from its tags."""

    format: str
    width_px: int
    height_px: int
    bit_depth: int
    mode: str
    tag_pixel_size_nm: float | None


@contextmanager
def opened(path: Path, name: str) -> Iterator[Image.Image]:
    """The image at `path`, fully decoded; InvalidInput for non-images and bombs."""
    image = _decoded(path, name)
    try:
        yield image
    finally:
        image.close()


def _decoded(path: Path, name: str) -> Image.Image:
    with warnings.catch_warnings():
        warnings.simplefilter("error", Image.DecompressionBombWarning)
        try:
            image = Image.open(path)
        except (Image.DecompressionBombError, Image.DecompressionBombWarning) as exc:
            raise _bomb(name, exc) from exc
        except (UnidentifiedImageError, OSError, SyntaxError, ValueError) as exc:
            raise _unreadable(name, exc) from exc
        try:
            if image.format not in FORMATS:
                raise InvalidInput("file", name, f"a TIFF, PNG or JPEG image, not {image.format}")
            image.load()
        except (Image.DecompressionBombError, Image.DecompressionBombWarning) as exc:
            image.close()
            raise _bomb(name, exc) from exc
        except (OSError, SyntaxError, ValueError) as exc:
            image.close()
            raise _unreadable(name, exc) from exc
        except InvalidInput:
            image.close()
            raise
    return image


def _bomb(name: str, exc: Exception) -> InvalidInput:
    return InvalidInput("file", name, f"an image of at most {Image.MAX_IMAGE_PIXELS:,} pixels "
                        f"(a larger one could exhaust the server's memory: {exc})")


def _unreadable(name: str, exc: Exception) -> InvalidInput:
    return InvalidInput("file", name, f"a TIFF, PNG or JPEG image that can be read ({exc})")


def facts(image: Image.Image) -> Facts:
    """Size, bit depth, mode and (for TIFF) the pixel size its resolution tags give."""
    return Facts(str(image.format), image.width, image.height, bit_depth(image), image.mode,
                 tag_pixel_size_nm(image))


def bit_depth(image: Image.Image) -> int:
    """Bits per sample of the original: the TIFF tag when there, else from the mode."""
    tags = getattr(image, "tag_v2", None)
    if tags is not None and BITS_PER_SAMPLE in tags:
        bits = tags[BITS_PER_SAMPLE]
        return int(bits[0] if isinstance(bits, tuple) else bits)
    if image.mode.startswith("I;16") or (image.mode == "I" and image.format == "PNG"):
        return 16  # Pillow opens 16-bit grey PNG as 32-bit "I"
    return {"1": 1, "I": 32, "F": 32}.get(image.mode, 8)


def tag_pixel_size_nm(image: Image.Image) -> float | None:
    """Nanometres per pixel from XResolution and ResolutionUnit (default inch, TIFF 6.0)."""
    tags = getattr(image, "tag_v2", None)
    if tags is None or X_RESOLUTION not in tags:
        return None
    per_unit = float(tags[X_RESOLUTION])
    nm = NM_PER_UNIT.get(int(tags.get(RESOLUTION_UNIT, 2)))
    if nm is None or not math.isfinite(per_unit) or per_unit <= 0:
        return None
    return nm / per_unit


def to_8bit(image: Image.Image) -> Image.Image:
    """An 8-bit L or RGB copy; deeper greys rescaled by their own min and max, not clipped."""
    if image.mode in ("L", "RGB"):
        return image.copy()
    if image.mode.startswith("I") or image.mode == "F":
        grey = image.convert("F") if image.mode == "F" else image.convert("I")
        low, high = grey.getextrema()  # a single band: (min, max) as numbers
        assert isinstance(low, int | float) and isinstance(high, int | float)
        scale = 255.0 / (high - low) if high > low else 0.0
        # point() on I and F images applies value * scale + offset to every pixel
        return grey.point(lambda v: v * scale - low * scale).convert("L")
    return image.convert("L" if image.mode in ("1", "LA") else "RGB")


def nice_length(target: float) -> float:
    """The largest 1, 2 or 5 × 10ⁿ not above `target` (a scale bar length people can read)."""
    if not target > 0 or not math.isfinite(target):
        raise ValueError(f"a scale bar needs a positive length, not {target!r}")
    power = 10 ** math.floor(math.log10(target))
    for step in (5, 2, 1):
        if step * power <= target * (1 + 1e-9):
            return step * power
    return power


def length_label(nm: float) -> str:
    """A length in nm, µm or mm as printed under a scale bar: 500 nm, 2 µm, 1 mm."""
    for unit, size in (("mm", 1e6), ("µm", 1e3)):
        if nm >= size:
            return f"{nm / size:g} {unit}"
    return f"{nm:g} nm"


def font(size: int) -> tuple[ImageFont.FreeTypeFont | ImageFont.ImageFont, bool]:
    """DejaVu Sans when installed (it has µ), else Pillow's own font; and whether it has µ."""
    try:
        return ImageFont.truetype("DejaVuSans.ttf", size), True
    except OSError:
        return ImageFont.load_default(size=size), False


def drawable(text: str, has_micro: bool) -> str:
    """The text as the font can draw it: 'um' for 'µm' in a font without µ."""
    return text if has_micro else text.replace("µ", "u")


def scale_bar(image: Image.Image, pixel_size_nm: float) -> tuple[float, int]:
    """Draw a scale bar about a fifth of the width, bottom left; (length in nm, length in px)."""
    length_nm = nice_length(image.width * pixel_size_nm / 5)
    length_px = max(1, round(length_nm / pixel_size_nm))
    draw = ImageDraw.Draw(image)
    margin, bar_h = max(8, image.width // 50), max(4, image.width // 120)
    face, has_micro = font(max(14, image.width // 40))
    label = drawable(length_label(length_nm), has_micro)
    left, top, right, bottom = draw.textbbox((0, 0), label, font=face, anchor="lt")
    text_w, text_h = right - left, bottom - top
    x0, y1 = margin, image.height - margin
    box = (x0 - 6, y1 - bar_h - text_h - 18, x0 + max(length_px, text_w) + 6, y1 + 6)
    ink, back = ((255, 255, 255), (0, 0, 0)) if image.mode == "RGB" else (255, 0)
    # A dark box behind a light bar reads on any image, bright or dark.
    draw.rectangle(box, fill=back)
    draw.rectangle((x0, y1 - bar_h, x0 + length_px - 1, y1 - 1), fill=ink)
    draw.text((x0, y1 - bar_h - text_h - 10), label, fill=ink, font=face, anchor="lt")
    return length_nm, length_px


def png_bytes(image: Image.Image) -> bytes:
    """The image as PNG bytes."""
    out = io.BytesIO()
    image.save(out, "PNG")
    return out.getvalue()


def thumbnail(image: Image.Image, size: int = THUMBNAIL_PX) -> Image.Image:
    """An 8-bit copy that fits in size × size, aspect kept."""
    small = to_8bit(image)
    small.thumbnail((size, size))
    return small


def preview(image: Image.Image, pixel_size_nm: float | None, size: int = PREVIEW_PX
            ) -> Image.Image:
    """An 8-bit copy that fits in size × size with a scale bar when the pixel size is known."""
    shown = thumbnail(image, size)
    if pixel_size_nm:
        scale_bar(shown, pixel_size_nm * image.width / shown.width)
    return shown
