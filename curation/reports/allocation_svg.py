"""Pictures for the allocation report: each issued item's mass budget, instrument time per
technique. Bars carry their numbers and a hatch per term, so nothing rests on colour."""

from __future__ import annotations

from html import escape

from curation.audit import allocations as accounting
from curation.reports.allocation import TechniqueRow

W, LEFT, RIGHT, BAR, GAP, FONT = 900, 150, 40, 28, 22, 18
#: room for technique names left of the hour bars
NAMES = 230
#: term -> (fill, hatch pattern id, word on the legend)
STYLE = {"consumed": ("#555", "solid"), "remaining": ("#fff", "none"),
         "transferred": ("#888", "diag"), "returned": ("#bbb", "dots"),
         "lost": ("#222", "cross"), accounting.UNACCOUNTED: ("#fff", "cross")}
PATTERNS = ('<defs><pattern id="diag" width="8" height="8" patternUnits="userSpaceOnUse">'
            '<path d="M0 8L8 0" stroke="#000" stroke-width="2"/></pattern>'
            '<pattern id="dots" width="8" height="8" patternUnits="userSpaceOnUse">'
            '<circle cx="4" cy="4" r="2" fill="#000"/></pattern>'
            '<pattern id="cross" width="8" height="8" patternUnits="userSpaceOnUse">'
            '<path d="M0 0L8 8M8 0L0 8" stroke="#000" stroke-width="1.5"/></pattern></defs>')


def _fill(term: str) -> str:
    colour, hatch = STYLE[term]
    return colour if hatch in ("solid", "none") else f"url(#{hatch})"


def _head(height: int, label: str) -> str:
    return (f'<svg xmlns="http://www.w3.org/2000/svg" role="img" viewBox="0 0 {W} {height}" '
            f'width="{W}" height="{height}" font-family="sans-serif"><title>{escape(label)}'
            f"</title>{PATTERNS}")


def mass_svg(accounts: list[accounting.Account], label: str) -> str:
    """One bar per issued item, split into its terms as shares of what was issued."""
    terms = [*accounting.TERMS, accounting.UNACCOUNTED]
    height = 60 + len(accounts) * (BAR + GAP) + 40
    out = [_head(height, label)]
    x = float(LEFT)
    for term in terms:  # the legend: a swatch and the word
        out.append(f'<rect x="{x}" y="8" width="18" height="18" fill="{_fill(term)}" '
                   f'stroke="#000"/><text x="{x + 24}" y="23" font-size="{FONT - 2}">{term}</text>')
        x += 24 + 11 * len(term) + 20
    span = W - LEFT - RIGHT
    for n, acc in enumerate(accounts):
        y, x = 50 + n * (BAR + GAP), float(LEFT)
        whole = max(acc.issued.ug, acc.accounted_ug, 1e-30)
        out.append(f'<text x="{LEFT - 8}" y="{y + 20}" font-size="{FONT}" text-anchor="end">'
                   f"{escape(acc.link.item.code)}</text>")
        for term in terms:
            width = span * sum(p.ug for p in acc.parts if p.term == term) / whole
            if width > 0:
                out.append(f'<rect class="part part-{term}" x="{x:.1f}" y="{y}" '
                           f'width="{max(width, 2):.1f}" height="{BAR}" fill="{_fill(term)}" '
                           f'stroke="#000"><title>{term}</title></rect>')
                x += width
        word = "balanced" if acc.is_balanced else "NOT BALANCED"
        out.append(f'<text x="{LEFT}" y="{y + BAR + 17}" font-size="{FONT - 4}">'
                   f"{acc.issued.ug:.4g} µg issued · {word}</text>")
    out.append("</svg>")
    return "".join(out)


def hours_svg(rows: list[TechniqueRow], label: str) -> str:
    """Instrument hours per technique, one labelled bar each."""
    height = 30 + len(rows) * (BAR + 10) + 20
    out = [_head(height, label)]
    longest = max((r.hours for r in rows), default=0.0) or 1.0
    for n, row in enumerate(rows):
        y = 20 + n * (BAR + 10)
        width = (W - NAMES - RIGHT - 160) * row.hours / longest
        out += [(f'<text x="{NAMES - 8}" y="{y + 20}" font-size="{FONT - 2}" text-anchor="end">'
                 f"{escape(row.technique)}</text>"),
                (f'<rect x="{NAMES}" y="{y}" width="{max(width, 1):.1f}" height="{BAR}" '
                 f'fill="#0b3d91"/>'),
                (f'<text x="{NAMES + width + 8:.1f}" y="{y + 20}" font-size="{FONT - 2}">'
                 f"{row.hours:.2f} h, {row.count} step{'s' if row.count != 1 else ''}</text>")]
    out.append("</svg>")
    return "".join(out)
