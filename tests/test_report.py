"""HTML run report: self-contained, promises kept, numbers equal to the summary files."""
from __future__ import annotations

import base64
import html
import html.parser

import numpy as np
import pytest
from astropy.table import Table

from retrieve.plotting import plot_band_diagram
from retrieve.plotting.style import figure_to_png_bytes
from retrieve.report import ReportContent, ReportFigure, ReportTable, render_html
from retrieve.report.html import STANDARD_CAVEATS, format_number


class ReportParser(html.parser.HTMLParser):
    """Collects ids, links, images and the cells of every ``data-table``."""

    def __init__(self):
        super().__init__()
        self.ids, self.links, self.images, self.external = set(), [], [], []
        self.tables: dict[str, list[list[tuple[str, str | None]]]] = {}
        self._table = None
        self._cell = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if "id" in a:
            self.ids.add(a["id"])
        if tag == "a" and "href" in a:
            self.links.append(a["href"])
        if tag == "img":
            self.images.append(a.get("src", ""))
        if tag in ("link", "script") and (a.get("href") or a.get("src")):
            self.external.append(a.get("href") or a.get("src"))
        if tag == "table" and "data-table" in a:
            self._table = a["data-table"]
            self.tables[self._table] = []
        if tag == "tr" and self._table:
            self.tables[self._table].append([])
        if tag in ("td", "th") and self._table:
            self._cell = [a.get("data-value"), ""]

    def handle_data(self, data):
        if self._cell is not None:
            self._cell[1] += data

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None and self._table:
            self.tables[self._table][-1].append((self._cell[1], self._cell[0]))
            self._cell = None
        if tag == "table":
            self._table = None


def parse_report(text: str) -> ReportParser:
    p = ReportParser()
    p.feed(text)
    return p


def table_as_dict(parsed: ReportParser, key: str) -> dict[str, dict[str, tuple[str, str | None]]]:
    """Rows of a report table keyed by their first cell, columns keyed by header."""
    rows = parsed.tables[key]
    header = [c[0] for c in rows[0]]
    return {r[0][0]: dict(zip(header, r)) for r in rows[1:]}


def test_render_html_keeps_numbers_figures_and_caveats():
    summary = Table({"name": ["t_iso", "log_g"], "median": [1712.3456789, 4.2512345],
                     "q16": [1690.1, 4.1], "q84": [1733.9, 4.4], "n_eff": [812, 790]})
    png = figure_to_png_bytes(plot_band_diagram(Table({"name": ["x"], "h2o_index": [0.5], "ch4_index": [0.9]})))
    content = ReportContent(
        title="test run", inputs=[("object", "Orsolya c"), ("data sets", "ifs, phot")],
        tables=[ReportTable("parameters", "Parameters", summary)],
        figures=[ReportFigure("bands", "Band-depth diagram.", png)], notes=["identification skipped"],
        config_text="[object]\nname = 'x' <&>")
    text = render_html(content)
    parsed = parse_report(text)
    # every promised section exists and every internal link resolves
    assert {"inputs", "table-parameters", "fig-bands", "caveats"} <= parsed.ids
    internal = [h[1:] for h in parsed.links if h.startswith("#")]
    assert internal and all(h in parsed.ids for h in internal)
    # self-contained: no external resources, the image is an embedded PNG
    assert parsed.external == []
    assert len(parsed.images) == 1 and parsed.images[0].startswith("data:image/png;base64,")
    assert base64.b64decode(parsed.images[0].split(",", 1)[1])[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature
    # numbers: full value in data-value equals the summary exactly; the shown text is its rounding
    rows = table_as_dict(parsed, "parameters")
    for row in summary:
        for col in ("median", "q16", "q84", "n_eff"):
            shown, full = rows[row["name"]][col]
            assert float(full) == float(row[col])
            assert shown == format_number(row[col])
    for caveat in STANDARD_CAVEATS:
        assert caveat in html.unescape(text)
    assert "&lt;&amp;&gt;" in text  # configuration text is escaped, not interpreted


@pytest.mark.parametrize("value,shown", [(1712.3456789, "1712"), (4.2512345, "4.251"), (3e-7, "3.000e-07"),
                                         (12, "12"), (np.nan, "—"), (True, "yes")])
def test_format_number(value, shown):
    # display rule of the report: 4 significant figures, scientific outside [1e-3, 1e5) (our convention)
    assert format_number(value) == shown
