"""Text into reportlab markup: the one place where spec text meets paragraph markup.

reportlab's Paragraph reads an XML-like markup (``<b>``, ``<font>``, ``<img src=...>``,
``<a href=...>``). Text from a spec is data: :func:`plain` escapes it, so a title like
``<img src="/etc/x.png"/>`` or ``a<b`` prints literally and nothing named by a spec is fetched,
embedded or linked. Renderers interpolate spec text only through :func:`plain`, and draw it
on a canvas only through :func:`shorten`.
"""

from __future__ import annotations

from xml.sax.saxutils import escape

from reportlab.pdfbase.pdfmetrics import stringWidth


def plain(text: object) -> str:
    """``text`` as paragraph markup that shows exactly ``text``: ``&``, ``<``, ``>`` and quotes
    escaped, control characters dropped. (Words too long for their cell are split by the
    paragraph styles' ``splitLongWords``, on by default.)"""
    s = "".join(c for c in str(text) if c.isprintable() or c == " ")
    return escape(s, {'"': "&quot;"})


def shorten(text: object, width_pt: float, font: str = "Helvetica", size: float = 8.0) -> str:
    """``text`` cut to ``width_pt`` points in ``font`` at ``size`` pt, with "..." when cut
    (for canvas strings, which neither wrap nor read markup)."""
    s = "".join(c for c in str(text) if c.isprintable())
    if stringWidth(s, font, size) <= width_pt:
        return s
    lo, hi = 0, len(s)
    while lo < hi:  # longest prefix that fits with the ellipsis
        mid = (lo + hi + 1) // 2
        if stringWidth(s[:mid] + "...", font, size) <= width_pt:
            lo = mid
        else:
            hi = mid - 1
    return s[:lo].rstrip() + "..."
