"""The self-contained HTML run report.

One file, no external resources: figures are embedded as base64 PNG, styles
inline.  Every number shown in a table is also written, unrounded, in the
cell's ``data-value`` attribute, so the report can be checked (and parsed)
against the run's summary files.

:func:`render_html` turns a :class:`ReportContent` into text;
:func:`retrieve.report.build.build_report` assembles the content from a run
folder.
"""
from __future__ import annotations

import base64
import dataclasses
import datetime
import html
import math
from collections.abc import Sequence

import numpy as np

#: Caveats printed in every report.
STANDARD_CAVEATS = (
    "The opacity tables bundled with retrieve are computed by the project's own code from published "
    "molecular constants and band parameters. They are approximations, adequate for demonstrations and "
    "for identifying bands at low resolution, not for precise abundances; for science, build tables "
    "from HITEMP or ExoMol line lists.",
    "Molecule detections are model-dependent: a Bayes factor compares two specific models (same "
    "temperature profile, chemistry, cloud and noise treatment, with and without the molecule). A "
    "different or more flexible model can change it.",
    "The conversion of a Bayes factor to an equivalent 'σ' significance (Benneke & Seager 2013, after "
    "Sellke, Bayarri & Berger 2001) is a convention that bounds a frequentist p-value; it is not itself "
    "a p-value, and evidences estimated from MCMC samples carry their own numerical uncertainty.",
    "Posterior intervals are conditional on the prior ranges listed in the settings; parameters whose "
    "posterior reaches a prior edge are constrained by the prior there.",
)


@dataclasses.dataclass
class ReportTable:
    """One table of the report.

    ``key`` becomes the anchor ``table-<key>``; ``rows`` is an astropy Table
    (or anything with ``colnames`` and row iteration).
    """

    key: str
    title: str
    rows: object
    note: str = ""


@dataclasses.dataclass
class ReportFigure:
    """One embedded figure (PNG bytes); anchor ``fig-<key>``."""

    key: str
    caption: str
    png: bytes


@dataclasses.dataclass
class ReportContent:
    """Everything a report shows, already computed."""

    title: str
    inputs: list[tuple[str, str]]
    tables: list[ReportTable]
    figures: list[ReportFigure]
    config_text: str = ""
    notes: list[str] = dataclasses.field(default_factory=list)
    caveats: Sequence[str] = STANDARD_CAVEATS
    generated_by: str = ""


_CSS = """
body{font-family:'DejaVu Sans',Verdana,sans-serif;color:#22223b;max-width:62rem;margin:2rem auto;padding:0 1rem;
line-height:1.45;background:#fdfbf6}
h1{font-size:1.6rem;border-bottom:3px solid #e0a030;padding-bottom:.3rem}
h2{font-size:1.2rem;margin-top:2.2rem;color:#b5452b}
table{border-collapse:collapse;margin:.6rem 0;font-size:.88rem}
th,td{border-bottom:1px solid #d8d0bd;padding:.25rem .6rem;text-align:right}
th{background:#efe6d2;text-align:center}
td:first-child,th:first-child{text-align:left}
figure{margin:1rem 0}
figure img{max-width:100%;border:1px solid #d8d0bd;background:white}
figcaption{font-size:.85rem;color:#555}
.note{background:#efe6d2;border-left:4px solid #e0a030;padding:.4rem .8rem}
.caveats li{margin-bottom:.4rem}
pre{background:#f3efe4;padding:.6rem;overflow-x:auto;font-size:.8rem}
nav ul{columns:2}
"""


def format_number(value) -> str:
    """Short display form of a number (4 significant figures; integers as is)."""
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    v = float(value)
    if not math.isfinite(v):
        return "—" if math.isnan(v) else ("∞" if v > 0 else "−∞")
    if v != 0 and (abs(v) >= 1e5 or abs(v) < 1e-3):
        return f"{v:.3e}"
    return f"{v:.4g}"


def _cell(value) -> str:
    """A ``<td>``; numbers carry their full value in ``data-value``."""
    if isinstance(value, np.ma.core.MaskedConstant):
        return "<td>—</td>"
    if isinstance(value, (bool, np.bool_)):
        return f"<td>{format_number(value)}</td>"
    if isinstance(value, (int, float, np.integer, np.floating)):
        full = repr(int(value)) if isinstance(value, (int, np.integer)) else repr(float(value))
        return f'<td data-value="{html.escape(full)}">{html.escape(format_number(value))}</td>'
    if isinstance(value, bytes):
        value = value.decode()
    return f"<td>{html.escape(str(value))}</td>"


def table_html(table: ReportTable) -> str:
    """HTML for one :class:`ReportTable` (section with anchor ``table-<key>``)."""
    rows = table.rows
    cols = list(rows.colnames)
    head = "".join(f"<th>{html.escape(c)}</th>" for c in cols)
    body = "\n".join("<tr>" + "".join(_cell(row[c]) for c in cols) + "</tr>" for row in rows)
    note = f'<p class="note">{html.escape(table.note)}</p>' if table.note else ""
    return (f'<section id="table-{table.key}"><h2>{html.escape(table.title)}</h2>{note}'
            f'<table data-table="{table.key}"><thead><tr>{head}</tr></thead><tbody>\n{body}\n</tbody></table></section>')


def figure_html(fig: ReportFigure) -> str:
    """An embedded ``<figure>`` with anchor ``fig-<key>``."""
    data = base64.b64encode(fig.png).decode("ascii")
    return (f'<figure id="fig-{fig.key}"><img alt="{html.escape(fig.caption)}" src="data:image/png;base64,{data}">'
            f"<figcaption>{html.escape(fig.caption)}</figcaption></figure>")


def render_html(content: ReportContent) -> str:
    """The complete report as one HTML document."""
    now = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    toc = ["<li><a href='#inputs'>Inputs and settings</a></li>"]
    toc += [f"<li><a href='#table-{t.key}'>{html.escape(t.title)}</a></li>" for t in content.tables]
    toc += [f"<li><a href='#fig-{f.key}'>{html.escape(f.caption.split('.')[0])}</a></li>" for f in content.figures]
    toc.append("<li><a href='#caveats'>Caveats</a></li>")
    inputs = "".join(f"<tr><td>{html.escape(k)}</td><td style='text-align:left'>{html.escape(str(v))}</td></tr>"
                     for k, v in content.inputs)
    notes = "".join(f'<p class="note">{html.escape(n)}</p>' for n in content.notes)
    config = (f"<details><summary>Fit configuration</summary><pre>{html.escape(content.config_text)}</pre></details>"
              if content.config_text else "")
    parts = [
        "<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
        f"<title>{html.escape(content.title)}</title><style>{_CSS}</style></head><body>",
        f"<h1>{html.escape(content.title)}</h1>",
        f"<p>Generated {now}{' by ' + html.escape(content.generated_by) if content.generated_by else ''}.</p>",
        notes,
        "<nav><h2>Contents</h2><ul>" + "".join(toc) + "</ul></nav>",
        f'<section id="inputs"><h2>Inputs and settings</h2><table>{inputs}</table>{config}</section>',
        *(table_html(t) for t in content.tables),
        '<section id="figures"><h2>Figures</h2>', *(figure_html(f) for f in content.figures), "</section>",
        '<section id="caveats" class="caveats"><h2>Caveats</h2><ul>',
        *(f"<li>{html.escape(c)}</li>" for c in content.caveats), "</ul></section>",
        "</body></html>",
    ]
    return "\n".join(parts)
