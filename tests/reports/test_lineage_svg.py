"""The lineage picture: layout and SVG drawing, without a database."""

from __future__ import annotations

import xml.etree.ElementTree as ET

from curation.history import TreeNode
from curation.model import Item
from curation.reports import lineage_svg

SVG = "{http://www.w3.org/2000/svg}"


def _item(item_id: int, code: str, kind: str, material: str = "", status: str = "stored") -> Item:
    return Item(id=item_id, code=code, kind=kind, material=material, status=status)


def _family() -> list[TreeNode]:
    """P-1 with lamellae L-1, L-2; needles N-1, N-2 from L-1; a second root Q-1."""
    p, q = _item(1, "P-1", "particle", "olivine <&> \"glass\""), _item(6, "Q-1", "particle")
    l1, l2 = _item(2, "L-1", "lamella"), _item(3, "L-2", "lamella", status="consumed")
    n1, n2 = _item(4, "N-1", "needle"), _item(5, "N-2", "needle")
    return [TreeNode(p, None, 0), TreeNode(q, None, 0), TreeNode(l1, 1, 1), TreeNode(l2, 1, 1),
            TreeNode(n1, 2, 2), TreeNode(n2, 2, 2)]


def _parse(svg: str) -> ET.Element:
    return ET.fromstring(svg)


def test_every_node_drawn_once_and_edges_are_the_parent_links() -> None:
    nodes = _family()
    root = _parse(lineage_svg.render(nodes))
    drawn = [g.get("data-item-id") for g in root.iter(f"{SVG}g")]
    assert sorted(drawn) == sorted(str(n.item.id) for n in nodes)
    edges = {(p.get("data-parent"), p.get("data-child")) for p in root.iter(f"{SVG}path")}
    assert edges == {(str(n.parent_id), str(n.item.id)) for n in nodes if n.parent_id}


def test_text_is_escaped() -> None:
    svg = lineage_svg.render(_family(), href=lambda i: f"/items/{i.code}?a=1&b=<2>")
    assert "<&>" not in svg and '"glass"' not in svg
    root = _parse(svg)  # well-formed XML: nothing leaked out of its element
    texts = [t.text or "" for t in root.iter(f"{SVG}text")]
    assert "olivine <&> \"glass\"" in texts
    hrefs = [a.get("href") for a in root.iter(f"{SVG}a")]
    assert "/items/P-1?a=1&b=<2>" in hrefs


def test_current_item_has_an_outline_and_a_written_marker() -> None:
    root = _parse(lineage_svg.render(_family(), current_id=2))
    marked = [g for g in root.iter(f"{SVG}g") if "current" in (g.get("class") or "").split()]
    assert [g.get("data-item-id") for g in marked] == ["2"]
    inside = {(e.tag, e.get("class")) for e in marked[0]}
    assert (f"{SVG}rect", "current-ring") in inside
    assert any("THIS ITEM" in (t.text or "") for t in marked[0].iter(f"{SVG}text"))
    others = [t.text or "" for g in root.iter(f"{SVG}g") if g is not marked[0]
              for t in g.iter(f"{SVG}text")]
    assert not any("THIS ITEM" in t for t in others)


def test_layout_columns_follow_depth_and_boxes_never_overlap() -> None:
    boxes = {b.node.item.id: b for b in lineage_svg.layout(_family())}
    assert [boxes[i].column for i in (1, 2, 4)] == [0, 1, 2]
    # A parent sits level with the middle of its children.
    assert boxes[2].row == (boxes[4].row + boxes[5].row) / 2
    spots = {(b.column, b.row) for b in boxes.values()}
    assert len(spots) == len(boxes)
    rows_per_column: dict[int, list[float]] = {}
    for b in boxes.values():
        rows_per_column.setdefault(b.column, []).append(b.row)
    for rows in rows_per_column.values():
        rows.sort()
        assert all(b - a >= 1 for a, b in zip(rows, rows[1:]))


def test_picture_is_big_enough_for_every_box() -> None:
    root = _parse(lineage_svg.render(_family(), current_id=1))
    width, height = float(root.get("width") or 0), float(root.get("height") or 0)
    for rect in root.iter(f"{SVG}rect"):
        x, y = float(rect.get("x") or 0), float(rect.get("y") or 0)
        assert x >= 0 and x + float(rect.get("width") or 0) <= width
        assert y >= 0 and y + float(rect.get("height") or 0) <= height


def test_links_only_when_asked_and_nothing_for_no_nodes() -> None:
    assert not list(_parse(lineage_svg.render(_family())).iter(f"{SVG}a"))
    linked = _parse(lineage_svg.render(_family(), href=lambda i: f"/items/{i.code}"))
    assert len(list(linked.iter(f"{SVG}a"))) == 6
    assert lineage_svg.render([]) == ""


def test_long_codes_are_shortened_but_kept_whole_in_the_title() -> None:
    long_code = "X" * 64
    root = _parse(lineage_svg.render([TreeNode(_item(1, long_code, "particle"), None, 0)]))
    code_text = next(t.text for t in root.iter(f"{SVG}text") if t.get("class") == "code")
    assert code_text is not None and code_text.endswith("…") and len(code_text) < 64
    assert long_code in (next(root.iter(f"{SVG}title")).text or "")
