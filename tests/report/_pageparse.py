"""A small HTML reader for section tests: visible text, tables (caption, header, rows) and
image alt texts of one section's markup."""

from __future__ import annotations

from html.parser import HTMLParser


class SectionPage(HTMLParser):
    """Collects ``text`` (all visible text joined by spaces), ``tables`` (dicts with
    ``caption``, ``header``, ``rows``), ``alts`` and ``details`` summaries."""

    def __init__(self, markup: str) -> None:
        super().__init__(convert_charrefs=True)
        self.chunks: list[str] = []
        self.tables: list[dict] = []
        self.alts: list[str] = []
        self.summaries: list[str] = []
        self.items: list[str] = []
        self._cell: list[str] | None = None
        self._row: list[str] | None = None
        self._cap: list[str] | None = None
        self._summary: list[str] | None = None
        self._li: list[str] | None = None
        self.feed(markup)
        self.text = " ".join(" ".join(self.chunks).split())

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "table":
            self.tables.append({"caption": "", "header": [], "rows": []})
        elif tag == "caption":
            self._cap = []
        elif tag == "tr":
            self._row = []
        elif tag in ("td", "th"):
            self._cell = []
        elif tag == "img":
            self.alts.append(a.get("alt") or "")
        elif tag == "summary":
            self._summary = []
        elif tag == "li":
            self._li = []

    def handle_endtag(self, tag):
        if tag == "caption" and self._cap is not None:
            self.tables[-1]["caption"] = "".join(self._cap).strip()
            self._cap = None
        elif tag in ("td", "th") and self._cell is not None and self._row is not None:
            self._row.append("".join(self._cell).strip())
            self._cell = None
            self._is_head = tag == "th"
        elif tag == "tr" and self._row is not None:
            t = self.tables[-1]
            if not t["header"] and getattr(self, "_is_head", False):
                t["header"] = self._row
            else:
                t["rows"].append(self._row)
            self._row = None
        elif tag == "summary" and self._summary is not None:
            self.summaries.append("".join(self._summary).strip())
            self._summary = None
        elif tag == "li" and self._li is not None:
            self.items.append(" ".join("".join(self._li).split()))
            self._li = None

    def handle_data(self, data):
        self.chunks.append(data)
        for buf in (self._cell, self._cap, self._summary, self._li):
            if buf is not None:
                buf.append(data)

    def table(self, caption_part: str) -> dict:
        """The first table whose caption contains ``caption_part``."""
        for t in self.tables:
            if caption_part in t["caption"]:
                return t
        raise AssertionError(f"no table captioned {caption_part!r}; captions: "
                             f"{[t['caption'] for t in self.tables]}")

    def table_with(self, column: str) -> dict:
        """The first table with a header cell ``column``."""
        for t in self.tables:
            if column in t["header"]:
                return t
        raise AssertionError(f"no table with column {column!r}")
