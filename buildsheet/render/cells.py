"""Fast text for the sheets: table cells as pre-wrapped plain strings, paragraphs that lay out
once per width, and drawings shared across pages as PDF form XObjects.

A reportlab table lays out a plain-string cell far faster than a Paragraph (no markup parse,
no line breaking on every wrap), so cells that hold plain text are wrapped here once, cached
by (text, font, size, width), and handed to the table as lines. The result looks the same: the
same greedy breaking at spaces that Paragraph does, words too long for the cell split by
characters (as the paragraph styles' ``splitLongWords`` does).
"""

from __future__ import annotations

from functools import lru_cache
from typing import Any

from reportlab import rl_config
from reportlab.graphics import renderPDF
from reportlab.graphics.shapes import Drawing
from reportlab.pdfbase.pdfmetrics import stringWidth
from reportlab.platypus import Flowable, Paragraph

#: Default left plus right padding of a reportlab table cell, points.
CELL_PADDING: float = 12.0


def printable(text: object) -> str:
    """``text`` with control characters dropped (newlines kept as line breaks)."""
    return "".join(c for c in str(text) if c.isprintable() or c in " \n")


@lru_cache(maxsize=8192)
def _wrapped(text: str, font: str, size: float, width: float) -> str:
    lines: list[str] = []
    space = stringWidth(" ", font, size)
    shrink = rl_config.spaceShrinkage * space  # Paragraph lets each space give a little
    for part in text.split("\n"):
        line, used, count = "", 0.0, 0
        for word in part.split():
            w = stringWidth(word, font, size)
            while w > width and len(word) > 1:  # a word longer than the cell: split it
                if line:
                    lines.append(line)
                    line, used, count = "", 0.0, 0
                cut = len(word) - 1
                while cut > 1 and stringWidth(word[:cut], font, size) > width:
                    cut -= 1
                lines.append(word[:cut])
                word = word[cut:]
                w = stringWidth(word, font, size)
            if line and used + space + w <= width + shrink * count:
                line, used, count = f"{line} {word}", used + space + w, count + 1
            elif line:
                lines.append(line)
                line, used, count = word, w, 1
            else:
                line, used, count = word, w, 1
        lines.append(line)
    return "\n".join(lines)


def wrap_cell(text: object, font: str, size: float, cell_width: float,
              padding: float = CELL_PADDING) -> str:
    """Plain ``text`` broken into lines that fit a table cell ``cell_width`` points wide (less
    ``padding``) in ``font`` at ``size`` pt, as one string with newlines (cached)."""
    return _wrapped(printable(text), font, float(size), float(cell_width - padding))


#: Most paragraphs repeat on every kit's sheet (cautions, advice, the exposure box): their
#: markup is parsed and their lines broken once per (text, style, bullet, width) for the whole
#: document. Bounded; holding the style keeps its id from being reused while cached.
_PARSED: dict[tuple[str, int, str | None], tuple[Any, ...]] = {}
_LAID_OUT: dict[tuple[str, int, str | None, float], dict[str, Any]] = {}
_CACHE_LIMIT = 4096
_NOT_SHARED = ("canv", "_shared_layout")


def clear_paragraph_caches() -> None:
    """Forget parsed and laid-out paragraphs (called at the start of each document)."""
    _PARSED.clear()
    _LAID_OUT.clear()


class CachedParagraph(Paragraph):
    """A Paragraph whose markup is parsed and whose lines are broken once per distinct
    (text, style, bullet, width) in a document: tables and keep-together groups wrap their
    content more than once, and the same paragraph repeats on every kit's sheet. A paragraph
    split across a page lays itself out afresh first, so a split never touches shared lines."""

    _shared_layout = False
    _parse_key: tuple[str, int, str | None] | None = None

    def _setup(self, text: Any, style: Any, bulletText: Any, frags: Any, cleaner: Any) -> None:
        key = (text, id(style), bulletText if isinstance(bulletText, str) else None)
        if frags is not None or not isinstance(text, str) or not isinstance(
                bulletText, (str, type(None))):
            super()._setup(text, style, bulletText, frags, cleaner)
            return
        self._parse_key = key
        hit = _PARSED.get(key)
        if hit is None:
            super()._setup(text, style, bulletText, frags, cleaner)
            if len(_PARSED) < _CACHE_LIMIT:
                _PARSED[key] = (style, self.text, self.frags, self.style, self.bulletText)
            return
        self.__dict__.update(text=hit[1], frags=hit[2], style=hit[3], bulletText=hit[4], debug=0)

    def _layout_key(self, availWidth: float) -> tuple[str, int, str | None, float] | None:
        if not isinstance(self.text, str) or not isinstance(self.bulletText, (str, type(None))):
            return None
        return self.text, id(self.style), self.bulletText, float(availWidth)

    def wrap(self, availWidth: float, availHeight: float) -> tuple[float, float]:
        key = self._layout_key(availWidth)
        state = _LAID_OUT.get(key) if key is not None else None
        if state is not None and state["style"] is self.style:
            self.__dict__.update(state)
            self._shared_layout = True
            return self.width, self.height
        out = super().wrap(availWidth, availHeight)
        if key is not None and len(_LAID_OUT) < _CACHE_LIMIT:
            _LAID_OUT[key] = {k: v for k, v in self.__dict__.items() if k not in _NOT_SHARED}
            self._shared_layout = True
        return out

    def split(self, availWidth: float, availHeight: float) -> list[Flowable]:
        if self._shared_layout:  # lay out privately: splitting edits the lines it splits
            self._shared_layout = False
            parsed = _PARSED.get(self._parse_key) if self._parse_key else None
            if parsed is not None:
                self.frags = parsed[2]
            Paragraph.wrap(self, availWidth, availHeight)
        return super().split(availWidth, availHeight)


class SharedDrawing(Flowable):
    """A drawing that repeats on many pages (the same design on every kit's sheet), drawn into
    the PDF once as a form XObject named ``name`` and placed by reference after that: smaller
    files and much less drawing work. ``name`` must be unique per distinct drawing."""

    def __init__(self, drawing: Drawing, name: str):
        super().__init__()
        self.drawing = drawing
        self.name = name
        self.width, self.height = drawing.width, drawing.height

    def wrap(self, availWidth: float, availHeight: float) -> tuple[float, float]:
        return self.width, self.height

    def draw(self) -> None:
        canv = self.canv
        defined: set[str] = canv.__dict__.setdefault("_shared_forms", set())
        if self.name not in defined:
            canv.beginForm(self.name, 0, 0, self.width, self.height)
            renderPDF.draw(self.drawing, canv, 0, 0)
            canv.endForm()
            defined.add(self.name)
        canv.doForm(self.name)


class SharedFlowable(Flowable):
    """A flowable that repeats unchanged on many sheets (a design's cut table, its cautions
    box): laid out once per width and drawn into the PDF once as a form XObject named
    ``name``, then placed by reference. If it must split across a page, the parts are the
    inner flowable's own parts, drawn as usual. ``name`` is unique per distinct content."""

    def __init__(self, inner: Flowable, name: str,
                 sizes: dict[float, tuple[float, float]] | None = None):
        super().__init__()
        self.inner = inner
        self.name = name
        self.hAlign = getattr(inner, "hAlign", "LEFT")
        self._width_for = 0.0
        self._size: dict[float, tuple[float, float]] = {} if sizes is None else sizes

    def again(self) -> SharedFlowable:
        """A new placement of the same content (the document keeps per-placement state on
        each flowable, such as a postponement to the next page)."""
        return SharedFlowable(self.inner, self.name, self._size)

    def wrap(self, availWidth: float, availHeight: float) -> tuple[float, float]:
        size = self._size.get(availWidth)
        if size is None:
            w, h = self.inner.wrap(availWidth, availHeight)
            size = self._size[availWidth] = (float(w), float(h))
        self.width: float = size[0]
        self.height: float = size[1]
        self._width_for = availWidth
        return size

    def split(self, availWidth: float, availHeight: float) -> list[Flowable]:
        self._size.pop(availWidth, None)  # the inner flowable is laid out afresh for its parts
        return self.inner.split(availWidth, availHeight)

    def getSpaceBefore(self) -> float:
        return self.inner.getSpaceBefore()

    def getSpaceAfter(self) -> float:
        return self.inner.getSpaceAfter()

    def draw(self) -> None:
        canv = self.canv
        name = f"{self.name}-{self._width_for:g}"
        defined: set[str] = canv.__dict__.setdefault("_shared_forms", set())
        if name not in defined:
            canv.beginForm(name, -50, -50, self.width + 50, self.height + 50)
            self.inner.wrap(self._width_for, self.height)  # the size it is drawn at
            self.inner.drawOn(canv, 0, 0)
            canv.endForm()
            defined.add(name)
        canv.doForm(name)
