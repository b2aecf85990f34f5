"""Pictures for pages and reports: the cumulative dose and air-exposure plot (SVG) and the
lineage tree as a PNG for the PDF (drawn with Pillow from the same layout as the SVG).

Pure functions; no database, no web. Limits are drawn dashed and written out in words, so
nothing rests on colour.
"""

from __future__ import annotations

import io
from collections.abc import Sequence
from datetime import datetime
from html import escape

from PIL import Image, ImageDraw, ImageFont

from curation.audit.exposure import Point
from curation.history import TreeNode
from curation.reports import lineage_svg

W, PANEL_H, LEFT, RIGHT, TOP, GAP = 900, 230, 110, 30, 40, 90
FONT_PX = 18


def _x(at: datetime, start: datetime, span: float) -> float:
    return LEFT + (W - LEFT - RIGHT) * ((at - start).total_seconds() / span if span else 0.5)


def _panel(points: list[tuple[datetime, float]], start: datetime, span: float, top: float,
           title: str, unit: str, limit: float | None) -> list[str]:
    """One step chart of a cumulative total, with its limit dashed and labelled."""
    high = max([v for _, v in points] + [limit or 0.0, 1e-9]) * 1.1
    bottom = top + PANEL_H

    def y(v: float) -> float:
        return bottom - PANEL_H * v / high

    out = [(f'<text x="{LEFT}" y="{top - 12:g}" font-size="{FONT_PX}" font-weight="700">'
           f"{escape(title)} ({escape(unit)})</text>"),
           f'<line x1="{LEFT}" y1="{bottom:g}" x2="{W - RIGHT}" y2="{bottom:g}" stroke="#222"/>',
           f'<line x1="{LEFT}" y1="{top:g}" x2="{LEFT}" y2="{bottom:g}" stroke="#222"/>',
           (f'<text x="{LEFT - 8}" y="{top + 6:g}" font-size="{FONT_PX}" text-anchor="end">'
           f"{high:.3g}</text>"),
           f'<text x="{LEFT - 8}" y="{bottom:g}" font-size="{FONT_PX}" text-anchor="end">0</text>']
    path, last = [f"M{LEFT} {bottom:g}"], 0.0
    for at, value in points:
        x = _x(at, start, span)
        path += [f"H{x:.1f}", f"V{y(value):.1f}"]
        last = value
    path.append(f"H{W - RIGHT}")
    out.append(f'<path class="total" d="{" ".join(path)}" fill="none" stroke="#0b3d91" '
               'stroke-width="3"/>')
    out.append(f'<text x="{W - RIGHT}" y="{y(last) - 8:.1f}" font-size="{FONT_PX}" '
               f'text-anchor="end">total {last:.4g}</text>')
    if limit is not None:
        out += [(f'<line class="limit" x1="{LEFT}" y1="{y(limit):.1f}" x2="{W - RIGHT}" '
                f'y2="{y(limit):.1f}" stroke="#8a1c1c" stroke-width="2" stroke-dasharray="10 6"/>'),
                (f'<text x="{LEFT + 8}" y="{y(limit) - 8:.1f}" font-size="{FONT_PX}">'
                f"limit {limit:g} (dashed)</text>")]
    return out


def budget_svg(series: Sequence[Point], dose_limit: float | None, air_limit: float | None,
               label: str) -> str:
    """Cumulative electron dose and air minutes over time, one panel each, as an SVG document."""
    height = TOP + 2 * PANEL_H + GAP + 50
    head = (f'<svg xmlns="http://www.w3.org/2000/svg" role="img" viewBox="0 0 {W} {height}" '
            f'width="{W}" height="{height}" font-family="sans-serif">'
            f"<title>{escape(label)}</title>")
    if not series:
        return (head + f'<text x="20" y="60" font-size="{FONT_PX}">No electron dose and no air '
                "exposure recorded on this item or what it inherits.</text></svg>")
    start, end = series[0].at, series[-1].at
    span = (end - start).total_seconds()
    parts = [head]
    parts += _panel([(p.at, p.electron_e_per_A2) for p in series], start, span, TOP,
                    "Cumulative electron dose", "e⁻/Å²", dose_limit)
    parts += _panel([(p.at, p.air_minutes) for p in series], start, span,
                    TOP + PANEL_H + GAP, "Cumulative air exposure", "min", air_limit)
    axis = TOP + 2 * PANEL_H + GAP + 30
    parts += [f'<text x="{LEFT}" y="{axis}" font-size="{FONT_PX}">{start:%Y-%m-%d} UTC</text>',
              (f'<text x="{W - RIGHT}" y="{axis}" font-size="{FONT_PX}" text-anchor="end">'
              f"{end:%Y-%m-%d} UTC</text>"), "</svg>"]
    return "".join(parts)


def tree_png(nodes: Sequence[TreeNode], current_id: int | None = None,
             scale: float = 1.0) -> bytes:
    """The lineage tree as a PNG, laid out exactly as the SVG picture."""
    boxes = lineage_svg.layout(nodes)
    m = lineage_svg
    columns = max((b.column for b in boxes), default=0) + 1
    rows = max((b.row for b in boxes), default=0) + 1
    width = 2 * m.MARGIN + columns * m.NODE_W + (columns - 1) * m.COL_GAP
    height = 2 * m.MARGIN + m.TAG_H + rows * m.NODE_H + (rows - 1) * m.ROW_GAP
    image = Image.new("RGB", (int(width * scale), int(height * scale)), "white")
    draw = ImageDraw.Draw(image)
    code_font = ImageFont.load_default(size=max(8, int(m.CODE_PX * scale)))
    text_font = ImageFont.load_default(size=max(8, int(m.TEXT_PX * scale)))
    by_id = {b.node.item.id: b for b in boxes}
    for b in boxes:
        parent = by_id.get(b.node.parent_id) if b.node.parent_id is not None else None
        if parent is not None and parent is not b:
            x1, y1 = parent.x + m.NODE_W, parent.y + m.NODE_H / 2
            x2, y2, mid = b.x, b.y + m.NODE_H / 2, parent.x + m.NODE_W + m.COL_GAP / 2
            draw.line([(v * scale, w * scale) for v, w in
                       ((x1, y1), (mid, y1), (mid, y2), (x2, y2))], fill="#3d4650", width=2)
    for b in boxes:
        item = b.node.item
        box = [b.x * scale, b.y * scale, (b.x + m.NODE_W) * scale, (b.y + m.NODE_H) * scale]
        thick = 5 if item.id == current_id else 2
        draw.rectangle(box, outline="#111" if item.id == current_id else "#3d4650", width=thick)
        gone = " (gone)" if item.status in lineage_svg.GONE else ""
        draw.text((box[0] + 12 * scale, box[1] + 8 * scale), item.code, fill="black",
                  font=code_font)
        draw.text((box[0] + 12 * scale, box[1] + 36 * scale),
                  f"{item.kind} · {item.status}{gone}", fill="black", font=text_font)
        draw.text((box[0] + 12 * scale, box[1] + 58 * scale), (item.material or "—")[:30],
                  fill="black", font=text_font)
    out = io.BytesIO()
    image.save(out, format="PNG")
    return out.getvalue()
