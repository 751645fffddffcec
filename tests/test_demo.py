"""The invented demo scenario and `retrieve demo`."""
from __future__ import annotations

import json
import tomllib
from pathlib import Path

import numpy as np
import pytest
from astropy.table import Table

from retrieve.demo import scenario as sc
from retrieve.demo.run import MARKER, prepare_output, truth_recovery
from retrieve.errors import UserError


@pytest.mark.parametrize("comp", sc.COMPANIONS, ids=lambda c: c.key)
def test_configurations_are_accepted_by_simulate_and_fit(comp, tmp_path):
    from retrieve.inference import parse_config
    from retrieve.simulate import SimulationSettings

    sim = tomllib.loads(sc.simulation_toml(comp))
    settings = SimulationSettings.from_mapping(sim["simulate"], "sim")
    assert settings.channels == 40 and settings.resolving_power == 40.0
    assert settings.filters == ["twomass-Ks", "wise2010-W1"]
    # every truth is a number in [parameters], so simulate records all of them
    assert {k: sim["parameters"][k] for k in comp.truths} == comp.truths
    cfg = parse_config(tomllib.loads(sc.fit_toml(comp, sc.QUICK)), where="fit", base_dir=tmp_path)
    free = set(cfg.free)
    # every truth except the fixed distance is a free parameter whose prior contains it
    for name, value in comp.truths.items():
        assert name in free
        low, high = cfg.free[name].bounds
        assert low < value < high
    assert cfg.fixed == {"distance_pc": sc.STAR["distance_pc"]}
    assert [d.name for d in cfg.datasets] == ["ifs", "phot"]


@pytest.mark.parametrize("comp,t_1bar,lo,hi", [(sc.COMPANIONS[0], 1750.0, 1600, 1900),
                                                (sc.COMPANIONS[1], 950.0, 900, 1000)], ids=["b", "c"])
def test_truth_profiles_match_the_stated_classes(comp, t_1bar, lo, hi):
    # the project's gradient profile evaluated at the truths gives the photospheric (1 bar)
    # temperatures stated in the scenario (L-type ~1600-1800 K, T-type ~900-1000 K; the task's ranges)
    from retrieve.atmosphere.profiles import build_profile

    prof = build_profile("gradient", {"gradient_pressures_bar": list(sc.GRADIENT_PRESSURES_BAR)}, "test")
    p = np.array([1e-4, 0.05, 1.0, 30.0])
    t = prof.temperature(p, comp.truths)
    assert t[-1] == pytest.approx(comp.truths["t_deep"], rel=1e-12, abs=0)
    assert lo < t[2] < hi and t[2] == pytest.approx(t_1bar, rel=0.01, abs=0)
    assert np.all(np.diff(t) > 0)  # no inversion


def test_cool_companion_has_more_methane_than_the_warm_one():
    b, c = sc.COMPANIONS
    assert c.truths["log_vmr_CH4"] - b.truths["log_vmr_CH4"] >= 3  # "strong CH4" vs "little CH4"
    assert "log_vmr_CH4" in c.main_parameters


def test_write_scenario_refuses_to_overwrite(tmp_path):
    paths = sc.write_scenario(tmp_path)
    assert sorted(paths) == ["b", "c"] and paths["c"]["fit"].is_file()
    with pytest.raises(UserError, match="exists"):
        sc.write_scenario(tmp_path)
    sc.write_scenario(tmp_path, overwrite=True)


def test_prepare_output_never_replaces_foreign_folders(tmp_path):
    out = tmp_path / "demo"
    prepare_output(out, overwrite=False)
    (out / "x.txt").write_text("data")
    with pytest.raises(UserError, match="--overwrite"):
        prepare_output(out, overwrite=False)
    with pytest.raises(UserError, match="not a demo output folder"):
        prepare_output(out, overwrite=True)
    assert (out / "x.txt").is_file()
    (out / MARKER).write_text("{}")
    prepare_output(out, overwrite=True)
    assert list(out.iterdir()) == []


def test_truth_recovery_uses_the_95_percent_interval():
    summary = Table({"name": ["log_g", "t_deep"], "median": [4.3, 1500.0], "p2_5": [4.1, 1450.0],
                     "p97_5": [4.5, 1550.0]})
    rec = truth_recovery(summary, {"log_g": 4.4, "t_deep": 1600.0, "other": 1.0}, ["log_g", "t_deep", "other"])
    assert rec["log_g"]["inside"] and not rec["t_deep"]["inside"]
    assert "other" not in rec


def _have_opacity_tables(project_root: Path) -> bool:
    folder = project_root / "opacity_tables"
    needed = [f"{m}.xsec.h5" for m in sc.ABSORBERS] + ["H2-H2.cia.h5", "H2-He.cia.h5"]
    have = {p.name for p in folder.glob("*.h5")}
    return all(n in have or n.replace("xsec", "ktable") in have for n in needed)


@pytest.mark.slow
def test_quick_demo_recovers_truths(tmp_path, project_root, capsys):
    """`retrieve demo --quick` end to end: report written, truths inside the 95 % intervals."""
    if not _have_opacity_tables(project_root):
        pytest.skip("bundled opacity tables (opacity_tables/*.h5) are not present")
    from retrieve.cli.main import main

    out = tmp_path / "demo"
    assert main(["demo", "--quick", "--out", str(out)]) == 0
    printed = capsys.readouterr().out
    info = json.loads((out / MARKER).read_text())
    assert info["status"] == "finished"
    for comp in info["companions"]:
        report = Path(comp["report"])
        assert report.is_file() and str(report) in printed
        text = report.read_text(encoding="utf-8")
        for fig in ("corner", "spectrum", "profile", "abundances"):
            assert f'id="fig-{fig}"' in text
        # the simulated truths of the main parameters lie inside the 95 % intervals,
        # read from the report's own parameter table
        from test_report import parse_report, table_as_dict

        rows = table_as_dict(parse_report(text), "parameters")
        for name in comp["recovery"]:
            truth = float(rows[name]["truth"][1])
            lo, hi = float(rows[name]["p2_5"][1]), float(rows[name]["p97_5"][1])
            assert lo <= truth <= hi, (comp["name"], name, truth, lo, hi)
        # the report's numbers are the run's summary.ecsv; identification tables are present
        summary = Table.read(Path(comp["run_dir"]) / "summary.ecsv", format="ascii.ecsv")
        for row in summary:
            assert float(rows[str(row["name"])]["median"][1]) == float(row["median"])
        if comp["identified"]:
            assert 'id="table-detections"' in text and 'id="table-bands"' in text
    # single figures through `retrieve plot`, as PDF, with a parameter subset
    run_dir = info["companions"][0]["run_dir"]
    assert main(["plot", run_dir, "--what", "corner", "--format", "pdf", "--params", "log_g,t_deep",
                 "--out", str(tmp_path / "figs")]) == 0
    assert (tmp_path / "figs" / "corner.pdf").read_bytes()[:5] == b"%PDF-"  # PDF header (ISO 32000-1, 7.5.2)
    # refuses to run again into the same folder without --overwrite
    assert main(["demo", "--quick", "--out", str(out)]) == 2


def test_examples_are_the_scenario_files(project_root):
    # examples/ holds exactly what write_scenario(FULL) and `retrieve simulate` produce
    from retrieve.observations.readers import read_dataset

    ex = project_root / "examples"
    for comp in sc.COMPANIONS:
        assert (ex / f"{comp.slug}_fit.toml").read_text() == sc.fit_toml(comp, sc.FULL)
        assert (ex / f"{comp.slug}_simulate.toml").read_text() == sc.simulation_toml(comp)
        for stem in ("ifs", "ifs_phot"):
            d = read_dataset(ex / f"{comp.slug}_{stem}.ecsv")
            assert d.meta["truths"] == {**comp.truths, "distance_pc": sc.STAR["distance_pc"]}
        spec = read_dataset(ex / f"{comp.slug}_ifs.ecsv")
        assert spec.n_points == sc.INSTRUMENT["channels"] and spec.covariance is not None
        # the covariance has the stated correlated fraction between neighbours:
        # C_ij / (σ_i σ_j) = A exp(-Δλ²/2ℓ²) (Greco & Brandt 2016 kernel, as documented in retrieve.simulate)
        s = np.sqrt(np.diag(spec.covariance))
        corr = spec.covariance[0, 1] / (s[0] * s[1])
        dl = spec.wavelength_um[1] - spec.wavelength_um[0]
        expected = sc.INSTRUMENT["correlated_fraction"] * np.exp(-0.5 * (dl / sc.INSTRUMENT["correlation_length_um"]) ** 2)
        assert corr == pytest.approx(expected, rel=1e-9, abs=0)


@pytest.mark.slow
def test_example_spectra_are_reproduced_by_simulate(project_root):
    if not _have_opacity_tables(project_root):
        pytest.skip("bundled opacity tables (opacity_tables/*.h5) are not present")
    from retrieve.observations.readers import read_dataset
    from retrieve.simulate import load_and_simulate

    comp = sc.COMPANIONS[1]
    result = load_and_simulate(project_root / "examples" / f"{comp.slug}_simulate.toml")
    stored = read_dataset(project_root / "examples" / f"{comp.slug}_ifs.ecsv")
    # the model mixes cross sections in float32 (forward_model._kappa) and numpy/BLAS pick their
    # kernels by CPU, so summation order and last bits differ between machines: files written on
    # one machine were reproduced to 2.5e-9 on another (AVX2 only); same machine: exact
    np.testing.assert_allclose(result.datasets[0].flux, stored.flux, rtol=1e-7)
