"""Escaping: user-supplied strings never become markup."""

from __future__ import annotations

import base64
from html.parser import HTMLParser

import pandas as pd
import pytest

from impactlink.report.html import Markup, el, esc, image, join, table

EVIL_COUNTY = '<script>alert("county")</script>'  # same strings as conftest.built plants
EVIL_ISSUER = '<img src=x onerror="alert(1)">'
EVIL_STAGE = "</td><b>watch</b>"


class _Tags(HTMLParser):
    """Collect start tags with attributes, and all text (entities decoded)."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict]] = []
        self.text: list[str] = []
        self._in_style = False

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))
        self._in_style = tag == "style"

    def handle_endtag(self, tag):
        self._in_style = False

    def handle_data(self, data):
        if not self._in_style:
            self.text.append(data)


def _parse(text: str) -> _Tags:
    parser = _Tags()
    parser.feed(text)
    parser.close()
    return parser


def test_esc_escapes_markup_characters():
    # html.escape with quote=True (Python standard library documentation).
    assert esc('<a href="x">&\'') == "&lt;a href=&quot;x&quot;&gt;&amp;&#x27;"
    assert esc(None) == "" and esc(float("nan")) == ""
    assert esc(Markup("<b>ok</b>")) == "<b>ok</b>"


def test_el_escapes_children_and_attributes():
    out = el("td", "<b>", title='"><script>', class_="x")
    assert out == '<td title="&quot;&gt;&lt;script&gt;" class="x">&lt;b&gt;</td>'
    assert join(["<i>", Markup("<br>")]) == "&lt;i&gt;\n<br>"


def test_el_rejects_a_tag_that_is_not_a_plain_name():
    with pytest.raises(ValueError, match="lower-case alphanumeric name, got 'img onerror'"):
        el("img onerror", "x")


def test_image_requires_alt_text_and_embeds_png():
    with pytest.raises(ValueError, match="alt text is required"):
        image(b"\x89PNG", alt="")
    out = image(b"\x89PNG", alt='chart of "x" <y>')
    tag = _parse(out).tags[1]
    assert tag[0] == "img" and tag[1]["alt"] == 'chart of "x" <y>'
    assert base64.b64decode(tag[1]["src"].split(",", 1)[1]) == b"\x89PNG"


def test_table_escapes_headers_and_cells():
    frame = pd.DataFrame({"<th>": [EVIL_COUNTY], "n": [1.0]})
    parsed = _parse(table(frame, caption="<caption>"))
    assert [t for t, _ in parsed.tags if t == "script"] == []
    assert EVIL_COUNTY in "".join(parsed.text)
    assert "<th>" in parsed.text and "<caption>" in parsed.text


def test_planted_script_in_county_issuer_stage_and_project_is_shown_as_text(built):
    run, html, _ = built
    parsed = _parse(html.read_text(encoding="utf-8"))
    tags = [t for t, _ in parsed.tags]
    assert "script" not in tags, "a planted <script> became a script element"
    assert "b" not in tags, "a planted <b> (stage or project name) became markup"
    assert not any(k.startswith("on") for _, attrs in parsed.tags for k in attrs), \
        "a planted event-handler attribute became live"
    shown = "".join(parsed.text)
    for planted in (EVIL_COUNTY, EVIL_ISSUER, EVIL_STAGE, "Fictional <b>basin</b> study"):
        assert planted in shown, f"{planted!r} should be visible as text"
    # Every <img> is one of ours: embedded PNG, never the planted x.
    srcs = [a.get("src", "") for t, a in parsed.tags if t == "img"]
    assert srcs and all(s.startswith("data:image/png;base64,") for s in srcs)
