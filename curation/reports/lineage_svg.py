"""The lineage tree as a picture: a left-to-right layout and its SVG drawing.

Pure functions from `history.TreeNode` lists to numbers and text; no database, no web.
Depth runs left to right and siblings stack downwards, so a particle with forty lamellae
grows a tall picture that scrolls like a page, not a wide one.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from html import escape

from curation.history import TreeNode
from curation.model import Item

#: box size and spacing, in SVG user units (pixels at scale 1)
NODE_W, NODE_H = 260, 86
COL_GAP, ROW_GAP = 60, 36
MARGIN = 12
#: the "this item" tag sits in the gap above the current item's box
TAG_H = 24
CODE_PX, TEXT_PX, TAG_PX = 20, 16, 15
#: statuses drawn with a dashed outline (the word is always written too)
GONE = frozenset({"consumed", "lost", "returned"})


@dataclass(frozen=True)
class Placed:
    """A tree node with its box's top-left corner."""

    node: TreeNode
    column: int
    row: float

    @property
    def x(self) -> float:
        return MARGIN + self.column * (NODE_W + COL_GAP)

    @property
    def y(self) -> float:
        return MARGIN + TAG_H + self.row * (NODE_H + ROW_GAP)


def _children(nodes: Sequence[TreeNode]) -> dict[int | None, list[TreeNode]]:
    """Children of each node id (None: the roots); unknown parents make a node a root."""
    ids = {n.item.id for n in nodes}
    children: dict[int | None, list[TreeNode]] = {}
    for n in nodes:
        parent = n.parent_id if n.parent_id in ids and n.parent_id != n.item.id else None
        children.setdefault(parent, []).append(n)
    return children


def layout(nodes: Sequence[TreeNode]) -> list[Placed]:
    """Every node once: depth gives the column, leaves take rows, parents centre on children."""
    children = _children(nodes)
    placed: dict[int, Placed] = {}
    next_row = 0

    def visit(node: TreeNode, column: int) -> float:
        nonlocal next_row
        kids = [k for k in children.get(node.item.id, []) if k.item.id not in placed]
        # Reserve the id first so a malformed cycle of parent links cannot recurse forever.
        placed[node.item.id] = Placed(node, column, next_row)
        rows = [visit(k, column + 1) for k in kids]
        row = (rows[0] + rows[-1]) / 2 if rows else next_row
        next_row += 0 if rows else 1
        placed[node.item.id] = Placed(node, column, row)
        return row

    for root in children.get(None, []):
        if root.item.id not in placed:
            visit(root, 0)
    for node in nodes:  # nodes caught in a cycle have no root: start them on their own
        if node.item.id not in placed:
            visit(node, 0)
    return [placed[n.item.id] for n in _unique(nodes)]


def _unique(nodes: Sequence[TreeNode]) -> list[TreeNode]:
    seen: set[int] = set()
    out = []
    for n in nodes:
        if n.item.id not in seen:
            seen.add(n.item.id)
            out.append(n)
    return out


def _fit(text: str, font_px: int, width: float) -> str:
    """Shorten text to about what fits in `width` (the full text is in the box's title)."""
    most = max(4, int(width / (font_px * 0.6)))
    return text if len(text) <= most else text[: most - 1] + "…"


def _edge(parent: Placed, child: Placed) -> str:
    x1, y1 = parent.x + NODE_W, parent.y + NODE_H / 2
    x2, y2 = child.x, child.y + NODE_H / 2
    mid = x1 + COL_GAP / 2
    return (f'<path class="edge" data-parent="{parent.node.item.id}" '
            f'data-child="{child.node.item.id}" d="M{x1:g} {y1:g} H{mid:g} V{y2:g} H{x2:g}" '
            'fill="none" stroke="#3d4650" stroke-width="2"/>')


def _title(item: Item, is_current: bool) -> str:
    words = f"{item.code}: {item.kind}, {item.status}"
    if item.material:
        words += f", {item.material}"
    return words + (" (this item)" if is_current else "")


def _current_marks(x: float, y: float) -> list[str]:
    """The outline ring and the written tag that mark the item whose page this is."""
    return [
        f'<rect class="current-ring" x="{x - 6:g}" y="{y - 6:g}" width="{NODE_W + 12:g}" '
        f'height="{NODE_H + 12:g}" rx="10" fill="none" stroke="#111" stroke-width="4"/>',
        f'<rect class="current-tag" x="{x - 6:g}" y="{y - 6 - TAG_H:g}" width="130" '
        f'height="{TAG_H:g}" fill="#111"/>',
        f'<text class="current-label" x="{x + 2:g}" y="{y - 12:g}" font-size="{TAG_PX}" '
        'font-weight="700" fill="#fff">▶ THIS ITEM</text>',
    ]


def _node(box: Placed, is_current: bool, href: Callable[[Item], str] | None) -> str:
    item, x, y = box.node.item, box.x, box.y
    room = NODE_W - 28
    dash = ' stroke-dasharray="8 5"' if item.status in GONE else ""
    status_class = "".join(c if c.isalnum() else "-" for c in str(item.status))
    classes = f"node status-{status_class}" + (" current" if is_current else "")
    parts = [f'<g class="{classes}" data-item-id="{item.id}">',
             f"<title>{escape(_title(item, is_current))}</title>"]
    if is_current:
        parts += _current_marks(x, y)
    parts += [
        f'<rect class="box" x="{x:g}" y="{y:g}" width="{NODE_W}" height="{NODE_H}" rx="6" '
        f'fill="#fff" stroke="#3d4650" stroke-width="2"{dash}/>',
        f'<text class="code" x="{x + 14:g}" y="{y + 28:g}" font-size="{CODE_PX}" '
        f'font-weight="700">{escape(_fit(item.code, CODE_PX, room))}</text>',
        f'<text class="meta" x="{x + 14:g}" y="{y + 52:g}" font-size="{TEXT_PX}">'
        f'{escape(_fit(f"{item.kind} · {item.status}", TEXT_PX, room))}</text>',
        f'<text class="material" x="{x + 14:g}" y="{y + 74:g}" font-size="{TEXT_PX}">'
        f"{escape(_fit(item.material or '—', TEXT_PX, room))}</text>",
        "</g>",
    ]
    body = "".join(parts)
    if href is None:
        return body
    return f'<a class="node-link" href="{escape(href(item))}">{body}</a>'


def render(
    nodes: Sequence[TreeNode], current_id: int | None = None,
    href: Callable[[Item], str] | None = None, label: str = "Lineage tree",
) -> str:
    """The lineage as an SVG element (text escaped); each box links to `href(item)` if given."""
    boxes = layout(nodes)
    if not boxes:
        return ""
    by_id = {b.node.item.id: b for b in boxes}
    columns = max(b.column for b in boxes) + 1
    rows = max(b.row for b in boxes) + 1
    width = 2 * MARGIN + columns * NODE_W + (columns - 1) * COL_GAP
    height = 2 * MARGIN + TAG_H + rows * NODE_H + (rows - 1) * ROW_GAP
    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" class="lineage" role="group" '
        f'aria-label="{escape(label)}" viewBox="0 0 {width:g} {height:g}" '
        f'width="{width:g}" height="{height:g}" font-family="system-ui, sans-serif">'
    ]
    parts += [_edge(by_id[b.node.parent_id], b) for b in boxes
              if b.node.parent_id in by_id and b.node.parent_id != b.node.item.id]
    parts += [_node(b, b.node.item.id == current_id, href) for b in boxes]
    parts.append("</svg>")
    return "".join(parts)
