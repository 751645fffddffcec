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


# --------------------------------------------------------------------------- a real run folder (toy model)
TOY_TRUTHS = {"coef_0": 0.5, "coef_1": 1.0}


@pytest.fixture(scope="module")
def toy_run(tmp_path_factory):
    """A small but real run folder written by retrieve.inference.fit with the linear toy model."""
    from retrieve.inference import fit, parse_config
    from retrieve.inference.toymodel import LinearModelFactory
    from retrieve.observations import Dataset
    from retrieve.observations.writers import write_dataset

    tmp = tmp_path_factory.mktemp("toyrun")
    rng = np.random.default_rng(11)
    x = np.linspace(1.0, 2.0, 30)
    y = TOY_TRUTHS["coef_0"] + TOY_TRUTHS["coef_1"] * (x - 1.0) + rng.normal(0, 0.1, x.size)
    write_dataset(Dataset("ifs", "spectrum", x, y, np.full(x.size, 0.1), meta={"truths": dict(TOY_TRUTHS)}),
                  tmp / "toy.ecsv")
    cfg = parse_config({
        "object": {"name": "toy object"},
        "parameters": {k: {"prior": "uniform", "low": -5.0, "high": 5.0} for k in TOY_TRUTHS},
        "datasets": [{"name": "ifs", "file": str(tmp / "toy.ecsv")}],
        "sampler": {"max_steps": 1500, "check_every": 500, "seed": 3, "progress": False,
                    "optimiser_max_evaluations": 300}})
    factory = LinearModelFactory(2)
    fit(cfg, out_dir=tmp / "run", model_factory=factory)
    return tmp / "run", factory


@pytest.mark.slow
def test_report_of_a_run_folder_matches_summary_files(toy_run):
    import json

    from retrieve.report.build import build_report

    run_dir, factory = toy_run
    path = build_report(run_dir, model_factory=factory)
    assert path == run_dir / "report.html"
    text = path.read_text(encoding="utf-8")
    parsed = parse_report(text)
    # promised sections: inputs, convergence, τ table, parameters, the two figures a toy model allows, caveats
    for anchor in ("inputs", "table-convergence", "table-autocorrelation", "table-parameters",
                   "fig-corner", "fig-spectrum", "caveats"):
        assert anchor in parsed.ids, anchor
    assert all(h[1:] in parsed.ids for h in parsed.links if h.startswith("#"))
    assert parsed.external == [] and all(s.startswith("data:image/png;base64,") for s in parsed.images)
    # figures a toy model cannot have are reported as not drawn, and identification as not run
    assert "Figure 'profile' not drawn" in html.unescape(text)
    assert "identification step was not run" in text
    # parameter table equals summary.ecsv and summary.json exactly (full values in data-value)
    summary = Table.read(run_dir / "summary.ecsv", format="ascii.ecsv")
    quantities = json.loads((run_dir / "summary.json").read_text())["quantities"]
    rows = table_as_dict(parsed, "parameters")
    assert set(rows) == set(summary["name"])
    for row in summary:
        name = str(row["name"])
        for col in ("median", "p2_5", "p16", "p84", "p97_5", "map"):
            assert float(rows[name][col][1]) == float(row[col]) == quantities[name][col]
        assert float(rows[name]["truth"][1]) == TOY_TRUTHS[name]
    # convergence numbers equal the manifest
    manifest = json.loads((run_dir / "manifest.json").read_text())
    conv = table_as_dict(parsed, "convergence")
    (only,) = conv.values()
    assert int(only["n_steps"][1]) == manifest["convergence"]["n_steps"]
    assert float(only["acceptance_fraction"][1]) == manifest["convergence"]["acceptance_fraction"]
    taus = table_as_dict(parsed, "autocorrelation")
    for name, tau in zip(manifest["param_names"], manifest["convergence"]["tau"]):
        assert float(taus[name]["tau_steps"][1]) == tau
        assert np.isclose(float(taus[name]["chain_length_over_tau"][1]), manifest["convergence"]["n_steps"] / tau)


@pytest.mark.slow
def test_truth_flags_follow_the_summary_intervals(toy_run):
    # truth_in_95 is p2_5 <= truth <= p97_5 of summary.ecsv (definition of the central 95 % interval)
    from retrieve.inference import load_run
    from retrieve.report.build import parameter_table

    run_dir, factory = toy_run
    summary = Table.read(run_dir / "summary.ecsv", format="ascii.ecsv")
    shifted = {"coef_0": TOY_TRUTHS["coef_0"], "coef_1": float(summary["p97_5"][1]) + 1.0}
    table = parameter_table(load_run(run_dir, model_factory=factory), shifted)
    for row, srow in zip(table, summary):
        truth = shifted[str(srow["name"])]
        assert bool(row["truth_in_95"]) == bool(srow["p2_5"] <= truth <= srow["p97_5"])
    assert not table["truth_in_95"][1]  # a value above p97_5 is outside


def test_report_cli_missing_run_folder_is_a_user_error(tmp_path, capsys):
    from retrieve.cli.main import main

    # exit code 2 and one line naming the file (the CLI contract of retrieve.errors.UserError)
    assert main(["report", str(tmp_path / "nope")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "manifest.json" in err[0]
