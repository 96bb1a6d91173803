"""How full each printed page is, measured from weasyprint's layout (imported only here
and in pdf.py): the lowest bottom of any line or image on the page over the page's usable
height. A page that a forced break ends early is fine only as the last page of a section;
``page_fills`` says which pages start a major section (an element of class ``part``)."""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any

HEADINGS = ("h1", "h2")  # a section's own heading (a continued section goes on with h3)


@dataclass(frozen=True)
class PageFill:
    number: int  # from 1
    fill: float  # 0 (empty) to 1 (content down to the bottom margin)
    starts_part: bool  # a major section starts on this page (after a forced break)


def render_document(html: str, base_url: str = ".") -> Any:
    """Lay the report's HTML out into pages (weasyprint's Document) without printing."""
    from weasyprint import HTML

    return HTML(string=html, base_url=base_url).render()


def _content(box: Any) -> Iterator[Any]:
    """Every box under ``box`` except page furniture: margin boxes, and fixed or absolute
    elements (the DRAFT watermark, repeated on every page)."""
    from weasyprint.formatting_structure import boxes

    for child in getattr(box, "children", ()):
        if isinstance(child, boxes.MarginBox) or child.style["position"] in ("fixed", "absolute"):
            continue
        yield child
        yield from _content(child)


def _starts_part(box: Any) -> bool:
    """True when an element of class ``part`` begins in ``box``'s subtree on this page: the
    part is a heading, or its first piece on this page is its heading."""
    for child in _content(box):
        classes = (child.element.get("class") or "").split() if child.element is not None else []
        if "part" in classes:
            if child.element_tag in HEADINGS:
                return True
            first = child.children[0] if getattr(child, "children", None) else None
            if first is not None and first.element_tag in HEADINGS:
                return True
    return False


def page_fills(document: Any) -> list[PageFill]:
    """Fill of each page of a laid-out ``document`` (``render_document``)."""
    from weasyprint.formatting_structure import boxes

    out = []
    for n, page in enumerate(document.pages, start=1):
        root = page._page_box
        top, height = root.content_box_y(), root.height
        lowest = top
        for box in _content(root):
            if isinstance(box, boxes.LineBox | boxes.ReplacedBox):
                lowest = max(lowest, box.position_y + box.margin_height())
        out.append(PageFill(n, min(1.0, (lowest - top) / height), _starts_part(root)))
    return out


def overflowing(document: Any) -> list[tuple[int, str]]:
    """Lines or images that reach past the right margin: (page number, their text)."""
    from weasyprint.formatting_structure import boxes

    out = []
    for n, page in enumerate(document.pages, start=1):
        root = page._page_box
        right = root.content_box_x() + root.width + 0.5
        for box in _content(root):
            if isinstance(box, boxes.TextBox | boxes.ReplacedBox):
                if box.position_x + box.margin_width() > right:
                    out.append((n, getattr(box, "text", box.element_tag)))
    return out


def short_pages(fills: list[PageFill], least: float = 1 / 3) -> list[PageFill]:
    """Pages under ``least`` full that are not the last page of a section (the page before
    one that starts a major section, or the last page)."""
    out = []
    for i, f in enumerate(fills):
        ends_section = i == len(fills) - 1 or fills[i + 1].starts_part
        if f.fill < least and not ends_section:
            out.append(f)
    return out
