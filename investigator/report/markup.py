"""A tiny HTML builder in which every value is escaped unless it was built here.

``Safe`` marks text that is already HTML (made by these helpers); anything else passed as content or as an
attribute value goes through ``html.escape`` first. So a column name, key, note or file name holding
``<script>`` ends up as text on the page, never as markup (OWASP, "Cross Site Scripting Prevention Cheat
Sheet": HTML-encode untrusted data placed in element content and quoted attribute values).
"""

from __future__ import annotations

import html
from collections.abc import Iterable


class Safe(str):
    """A fragment of HTML built by this module (or a literal in the code): not escaped again."""

    __slots__ = ()


def visible(value: object) -> str:
    """User text with control and invisible formatting characters (e.g. a right-to-left override) shown as
    escapes, so what the page shows is what the cell holds."""
    text = str(value)
    if text.isprintable():
        return text
    return "".join(c if c.isprintable() or c in "\n\t" else c.encode("unicode_escape").decode("ascii")
                   for c in text)


def esc(value: object) -> Safe:
    """``value`` as HTML: Safe fragments as they are, everything else escaped."""
    if isinstance(value, Safe):
        return value
    return Safe(html.escape(visible(value), quote=True))


def join(parts: Iterable[object], sep: str = "") -> Safe:
    return Safe(esc(sep).join(esc(p) for p in parts))


def tag(name: str, *content: object, **attrs: object) -> Safe:
    """``<name attrs>content</name>``; ``class_`` gives ``class``; attributes set to None are left out."""
    text = "".join(
        f' {k.rstrip("_").replace("_", "-")}="{esc(v)}"' for k, v in attrs.items() if v is not None
    )
    return Safe(f"<{name}{text}>{join(content)}</{name}>")


def table(headers: Iterable[object], rows: Iterable[Iterable[object]], *, class_: str | None = None,
          numeric: Iterable[int] = (), nowrap: Iterable[int] = ()) -> Safe:
    """A table; columns listed in ``numeric`` (0-based) are right-aligned, those in ``nowrap`` not wrapped."""
    right, keep = set(numeric), set(nowrap)

    def kind(j: int) -> str | None:
        names = ["num"] * (j in right) + ["nowrap"] * (j in keep)
        return " ".join(names) or None

    head = tag("tr", *(tag("th", h, class_=kind(j)) for j, h in enumerate(headers)))
    body = [tag("tr", *(tag("td", c, class_=kind(j)) for j, c in enumerate(row))) for row in rows]
    return tag("table", tag("thead", head), tag("tbody", *body), class_=class_)


def definitions(pairs: Iterable[tuple[object, object]]) -> Safe:
    """A two-column list of facts (``<dl>``)."""
    return tag("dl", *(Safe(tag("dt", k) + tag("dd", v)) for k, v in pairs), class_="facts")


def items(values: Iterable[object], *, ordered: bool = False) -> Safe:
    return tag("ol" if ordered else "ul", *(tag("li", v) for v in values))


def share_bar(share: float) -> Safe:
    """A share (0..1, may be negative or above 1) as a bar drawn in CSS, with the percentage beside it."""
    width = max(0.0, min(1.0, abs(share))) * 100
    kind = "bar neg" if share < 0 else "bar"
    return Safe(f'<span class="{kind}"><span style="width:{width:.1f}%"></span></span> {share:.0%}')
