"""Reading a report page back with the standard library's HTML parser: tables by id, section
ids, figure titles and every attribute that could make a browser fetch something."""

from __future__ import annotations

from dataclasses import dataclass, field
from html.parser import HTMLParser


@dataclass
class Row:
    attrs: dict[str, str]
    cells: list[str] = field(default_factory=list)


@dataclass
class Page:
    tables: dict[str, list[Row]] = field(default_factory=dict)
    sections: list[str] = field(default_factory=list)
    figures: list[str] = field(default_factory=list)  # aria-label of each inline SVG
    svg_texts: list[list[str]] = field(default_factory=list)  # text elements per SVG
    fetching: list[tuple[str, str, str]] = field(default_factory=list)  # (tag, attr, value)
    list_items: dict[str, list[str]] = field(default_factory=dict)  # by the list's id


class _Reader(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.page = Page()
        self._table: str | None = None
        self._row: Row | None = None
        self._cell: list[str] | None = None
        self._svg_depth = 0
        self._text: list[str] | None = None
        self._list: str | None = None
        self._item: list[str] | None = None
        self._section: str | None = None

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = {k: v or "" for k, v in attrs}
        for key in ("src", "href", "xlink:href", "srcset", "poster", "data", "action"):
            if key in a:
                self.page.fetching.append((tag, key, a[key]))
        if tag == "section" and "id" in a:
            self.page.sections.append(a["id"])
            self._section = a["id"]
        elif tag == "table":
            self._table = a.get("id", f"table{len(self.page.tables)}")
            self.page.tables[self._table] = []
        elif tag == "tr" and self._table is not None:
            self._row = Row(a)
            self.page.tables[self._table].append(self._row)
        elif tag in ("td", "th") and self._row is not None:
            self._cell = []
        elif tag == "svg":
            self._svg_depth += 1
            self.page.figures.append(a.get("aria-label", ""))
            self.page.svg_texts.append([])
        elif tag == "text" and self._svg_depth:
            self._text = []
        elif tag == "ul":
            self._list = a.get("id") or self._section
            self.page.list_items.setdefault(self._list or "", [])
        elif tag == "li" and self._list is not None:
            self._item = []

    def handle_endtag(self, tag: str) -> None:
        if tag in ("td", "th") and self._cell is not None and self._row is not None:
            self._row.cells.append(" ".join("".join(self._cell).split()))
            self._cell = None
        elif tag == "tr":
            self._row = None
        elif tag == "table":
            self._table = None
        elif tag == "svg":
            self._svg_depth -= 1
        elif tag == "text" and self._text is not None:
            self.page.svg_texts[-1].append("".join(self._text).strip())
            self._text = None
        elif tag == "li" and self._item is not None:
            self.page.list_items[self._list or ""].append(" ".join("".join(self._item).split()))
            self._item = None
        elif tag == "ul":
            self._list = None

    def handle_data(self, data: str) -> None:
        for buf in (self._cell, self._text, self._item):
            if buf is not None:
                buf.append(data)


def read_page(html: str) -> Page:
    reader = _Reader()
    reader.feed(html)
    reader.close()
    return reader.page


def table_by_first_cell(rows: list[Row]) -> dict[str, list[str]]:
    return {r.cells[0]: r.cells[1:] for r in rows if r.cells}
