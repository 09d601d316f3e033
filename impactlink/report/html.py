"""HTML assembly: a tiny builder where every piece of text is escaped.

Rules that keep user-supplied strings (county names, issuer names, stage names, project
names) inert:

- :func:`esc` (``html.escape`` with quotes) is applied to every text and attribute value;
- only :class:`Markup` -- produced by the functions of this module -- passes through
  unescaped, so a raw string can never become markup by accident;
- the page holds no script at all; images are ``data:`` URIs, so the file has no network
  dependency.

No template engine is used: the page is a few dozen fixed elements, and a builder of
plain functions keeps the escaping rule in one place.
"""

from __future__ import annotations

import base64
import html as _html
import math
from collections.abc import Iterable
from string import Template

import pandas as pd

from impactlink.errors import ReportError
from impactlink.report.palette import CATEGORICAL, NEUTRAL, SEQUENCE

__all__ = [
    "Markup",
    "esc",
    "el",
    "join",
    "paragraph",
    "table",
    "image",
    "details",
    "page",
    "link",
]


class Markup(str):
    """A string that is already safe HTML (built by this module)."""

    __slots__ = ()


def esc(value) -> Markup:
    """Escape any value as HTML text; :class:`Markup` passes through unchanged.

    Examples
    --------
    >>> esc('<script>alert("x")</script>')
    '&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt;'
    """
    if isinstance(value, Markup):
        return value
    if value is None or value is pd.NA or (isinstance(value, float) and math.isnan(value)):
        return Markup("")
    return Markup(_html.escape(str(value), quote=True))


def join(parts: Iterable, sep: str = "\n") -> Markup:
    """Join pieces, escaping any that are not :class:`Markup`."""
    return Markup(sep.join(esc(p) for p in parts))


def el(tag: str, *children, **attrs) -> Markup:
    """One element. Attribute names use ``_`` for ``-`` and a trailing ``_`` for keywords
    (``class_="x"``, ``aria_label="y"``); values and children are escaped.

    Raises
    ------
    ReportError
        If ``tag`` is not a plain lower-case tag name.
    """
    if not tag.isalnum() or not tag.islower():
        raise ReportError(f"el: tag must be a lower-case alphanumeric name, got {tag!r}")
    parts = []
    for key, value in attrs.items():
        if value is None or value is False:
            continue
        name = key.rstrip("_").replace("_", "-")
        parts.append(name if value is True else f'{name}="{esc(value)}"')
    opening = f"<{tag}{' ' if parts else ''}{' '.join(parts)}>"
    if tag in ("img", "meta", "br", "hr", "link"):
        return Markup(opening)
    return Markup(f"{opening}{join(children, '')}</{tag}>")


def paragraph(*children, **attrs) -> Markup:
    """A ``<p>`` holding escaped text (and any Markup pieces)."""
    return el("p", *children, **attrs)


def link(href: str, text) -> Markup:
    """A relative link (to a table in the run folder)."""
    return el("a", text, href=href)


def _cell(value, digits: int) -> str:
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        if math.isnan(value):
            return ""
        if value.is_integer() and abs(value) < 1e9:
            return str(int(value))
        return f"{value:.{digits}f}"
    if value is None or value is pd.NA:
        return ""
    return str(value)


def table(frame: pd.DataFrame, *, caption: str | None = None, digits: int = 3,
          max_rows: int = 200) -> Markup:
    """A scrolling HTML table of a frame; every header and cell is escaped.

    Parameters
    ----------
    frame : DataFrame
    caption : str, optional
    digits : int, default 3
        Decimals for non-integer floats.
    max_rows : int, default 200
        Longer frames are cut, with a note saying so.
    """
    shown = frame.head(max_rows)
    head = el("tr", *[el("th", c, scope="col") for c in shown.columns])
    body = [
        el("tr", *[el("td", _cell(v, digits)) for v in row])
        for row in shown.itertuples(index=False, name=None)
    ]
    cap = el("caption", caption) if caption else Markup("")
    note = Markup("")
    if len(frame) > max_rows:
        note = paragraph(f"First {max_rows} of {len(frame)} rows; the full table is in the "
                         "linked file.", class_="note")
    return join([el("div", el("table", cap, el("thead", head), el("tbody", *body)),
                    class_="scroll", tabindex="0", role="region",
                    aria_label=caption or "table"), note])


def image(png: bytes, *, alt: str, caption: str | None = None, name: str | None = None) -> Markup:
    """A figure with the PNG embedded as a base64 data URI and its alt text."""
    if not alt:
        raise ReportError("image: alt text is required for every image")
    uri = "data:image/png;base64," + base64.b64encode(png).decode("ascii")
    cap = el("figcaption", caption) if caption else Markup("")
    return el("figure", el("img", src=uri, alt=alt, loading="eager", data_name=name), cap)


def details(summary, *children) -> Markup:
    """A collapsible block (long per-county tables; their full versions are linked files)."""
    return el("details", el("summary", summary), *children)


_CSS = Template("""
:root { --ink: $ink; --accent: $accent; --pale: $pale; --grid: $grid;
        --text: $text; --band: $band; }
* { box-sizing: border-box; }
html { -webkit-text-size-adjust: 100%; }
body { margin: 0; font: 16px/1.5 system-ui, -apple-system, "Segoe UI", Roboto, sans-serif;
       color: var(--text); background: #fff; }
main { max-width: 62rem; margin: 0 auto; padding: 0.75rem 1rem 3rem; }
h1 { font-size: 1.5rem; margin: 0.4rem 0 0.3rem; color: var(--ink); }
h2 { font-size: 1.25rem; margin: 2rem 0 0.5rem; padding-bottom: 0.2rem;
     border-bottom: 3px solid var(--accent); color: var(--ink); }
h3 { font-size: 1.05rem; margin: 1.2rem 0 0.4rem; color: var(--ink); }
.meta { color: #555; font-size: 0.9rem; margin: 0; }
.cautions { border: 2px solid var(--ink); border-left: 10px solid var(--accent);
            background: var(--pale); padding: 0.5rem 0.9rem; margin: 0.8rem 0; }
.cautions ul { margin: 0.2rem 0; padding-left: 1.2rem; }
.cards { display: grid; grid-template-columns: repeat(auto-fit, minmax(17rem, 1fr));
         gap: 0.8rem; }
.card { border: 1px solid var(--grid); border-top: 6px solid var(--ink); padding: 0.6rem 0.8rem;
        background: #fff; break-inside: avoid; }
.card h3 { margin-top: 0; }
.card dl { margin: 0; }
.card dt { font-weight: 600; font-size: 0.85rem; text-transform: uppercase;
           letter-spacing: 0.03em; color: #444; margin-top: 0.4rem; }
.card dd { margin: 0; }
.verdict { font-weight: 700; }
.others { font-size: 0.9rem; margin: 0.5rem 0 0; padding-left: 1.1rem; }
.glance { padding-left: 1.1rem; margin: 0.4rem 0 0.6rem; }
.glance li { margin: 0.15rem 0; }
nav ol { columns: 2 14rem; font-size: 0.9rem; padding-left: 1.3rem; }
figure { margin: 0.8rem 0; break-inside: avoid; }
figure img { display: block; max-width: 100%; height: auto; border: 1px solid var(--grid); }
figcaption { font-size: 0.9rem; color: #444; margin-top: 0.2rem; }
.scroll { overflow-x: auto; max-width: 100%; margin: 0.5rem 0; }
table { border-collapse: collapse; font-size: 0.8rem; min-width: 50%; }
caption { text-align: left; font-weight: 600; padding: 0.2rem 0; }
th, td { border: 1px solid var(--grid); padding: 0.2rem 0.35rem; text-align: left;
         vertical-align: top; }
th { background: var(--band); }
@media screen { th { overflow-wrap: anywhere; } }
tbody tr:nth-child(even) { background: #fafafa; }
.note, .absent { color: #555; font-style: italic; }
.files { font-size: 0.9rem; }
pre { white-space: pre-wrap; word-break: break-word; font-size: 0.8rem; background: #f6f6f6;
      padding: 0.5rem; }
a { color: var(--ink); }
.demo { background: #fff3c4; border: 2px solid #8a6d00; padding: 0.35rem 0.8rem;
        margin: 0.4rem 0; font-size: 1rem; }
.first .cautions { margin: 0.4rem 0; padding: 0.3rem 0.8rem; font-size: 0.9rem; }
.first .cautions ul { display: flex; flex-wrap: wrap; gap: 0 1.2rem; list-style: none;
                      padding: 0; margin: 0.1rem 0 0; }
.first h2 { margin: 0.8rem 0 0.4rem; }
.answers { display: grid; grid-template-columns: repeat(auto-fit, minmax(14rem, 1fr));
           gap: 0.6rem; }
.answer { border: 1px solid var(--grid); border-top: 5px solid var(--ink);
          padding: 0.35rem 0.6rem; font-size: 0.85rem; line-height: 1.35; }
.answer h3 { margin: 0 0 0.2rem; font-size: 0.95rem; }
.answer dl { margin: 0; } .answer dt { font-weight: 700; margin-top: 0.25rem; }
.answer dd { margin: 0; }
.foryou { font-size: 0.9rem; padding-left: 1.1rem; margin: 0.5rem 0; }
.glossary { columns: 2 22rem; font-size: 0.9rem; }
.glossary dt { font-weight: 700; margin-top: 0.3rem; break-after: avoid; }
.glossary dd { margin: 0 0 0 0.8rem; break-before: avoid; }
.finder { columns: 4 10rem; list-style: none; padding: 0; font-size: 0.95rem; }
.maprow { display: grid; grid-template-columns: repeat(auto-fit, minmax(20rem, 1fr));
          gap: 0.8rem; }
.svgmap { max-width: 36rem; margin: 0.4rem 0; }
.svgmap svg { display: block; width: 100%; min-width: 300px; height: auto; }
.svgmap text { font-size: 17px; fill: #222; }
.svgmap .lab text { font-size: 17px; paint-order: stroke; stroke: #fff; stroke-width: 3px;
                    text-anchor: middle; }
.svgmap a:hover path, .svgmap a:focus path { stroke: #000; stroke-width: 2; }
.maptitle { font-size: 1rem; margin-bottom: 0.2rem; }
.legend { list-style: none; padding: 0; margin: 0.2rem 0; font-size: 0.85rem;
          display: flex; flex-wrap: wrap; gap: 0.1rem 0.9rem; }
.legend .sw { display: inline-block; width: 0.9rem; height: 0.9rem; margin-right: 0.3rem;
              vertical-align: -0.1rem; border: 1px solid #5a5a5a; }
.legend .nv { background: radial-gradient(#6b6b6b 20%, #fff 25%) 0 0 / 5px 5px; }
.county-card { border: 1px solid var(--grid); border-top: 6px solid var(--accent);
               padding: 0.4rem 0.9rem; margin: 1rem 0; }
.county-card h3 .meta { font-weight: 400; font-size: 0.9rem; }
.county-card h4 { margin: 0.6rem 0 0.2rem; font-size: 0.95rem; }
.county-card ul { margin: 0.1rem 0; padding-left: 1.1rem; }
.county-card:target { outline: 3px solid var(--accent); }
@media (max-width: 40rem) {
  body { font-size: 15px; }
  .cautions { font-size: 0.9rem; padding: 0.4rem 0.6rem; }
  h2 { margin-top: 1.2rem; }
  main { padding: 0.5rem 0.6rem 2rem; }
  h1 { font-size: 1.25rem; }
}
@media print {
  body { font-size: 10pt; }
  table { font-size: 9pt; }
  h2 { margin-top: 1rem; }
  main { max-width: none; padding: 0; }
  nav { display: none; }
  h2 { break-after: avoid; }
  .scroll { overflow: visible; }
  a { color: inherit; text-decoration: none; }
  .card, figure, table { break-inside: avoid; }
  .county-card { break-before: page; break-inside: avoid; border: none; margin: 0; }
  .after-main > section { break-before: page; }
}
""").substitute({
    "ink": CATEGORICAL["ink"], "accent": CATEGORICAL["marigold"], "pale": SEQUENCE[0],
    "grid": NEUTRAL["grid"], "text": NEUTRAL["text"], "band": SEQUENCE[1],
})


def page(*, title: str, subtitle: str, body: Iterable[Markup], lang: str = "en") -> str:
    """The whole document: head with inline style, then ``body`` inside ``<main>``.

    Parameters
    ----------
    title, subtitle : str
        Escaped.
    body : iterable of Markup
        Page content, in order.

    Returns
    -------
    str
        A complete HTML5 document with no external resources.
    """
    head = join([
        Markup('<meta charset="utf-8">'),
        Markup('<meta name="viewport" content="width=device-width, initial-scale=1">'),
        el("meta", name="generator", content="impactlink"),
        el("title", title),
        Markup(f"<style>{_CSS}</style>"),
    ])
    main = el("main", el("header", el("h1", title), paragraph(subtitle, class_="meta")), *body)
    return f"<!DOCTYPE html>\n<html lang=\"{esc(lang)}\">\n<head>\n{head}\n</head>\n<body>\n{main}\n</body>\n</html>\n"
