"""Detection checks on spectra simulated with the real forward model and the bundled opacity tables.

* a cool (900 K) methane-bearing atmosphere: CH4 detected above 5 sigma, its 1.6 and 2.2 um bands flagged;
* a hot (1800 K) atmosphere simulated without CH4: no CH4 detection, and over 20 noise realisations
  false detections at >= 3 sigma within the binomial bound that the stated significance implies.

Kept cheap: the cool case fits three free parameters (t_int, radius, log VMR of CH4) with the others
fixed at their true values, H and K bands only, 14 layers, 1 angle, short chains; the hot case uses exact draws from a
gridded two-parameter posterior of real forward-model spectra (see its docstring).
"""
import math
from pathlib import Path

import numpy as np
import pytest
from astropy.table import Table
from scipy import special, stats

from retrieve.observations import Dataset
from retrieve.observations.writers import write_dataset

ROOT = Path(__file__).resolve().parents[1]
TABLES = ROOT / "opacity_tables"
ABSORBERS = ("H2O", "CH4", "CO")
NEEDED = [f"{s}.xsec.h5" for s in ABSORBERS] + ["H2-H2.cia.h5", "H2-He.cia.h5"]
MODEL = {"absorbers": list(ABSORBERS), "profile": "guillot", "cia": ["H2-H2", "H2-He"], "hminus": False,
         "rayleigh": True, "layers": 14, "angles": 1, "pressure_range_bar": [1e-4, 30.0]}
FIXED = {"log_g": 4.5, "distance_pc": 10.0, "t_irr": 10.0, "log_kappa_ir": -2.5, "log_gamma": -1.0}
COOL = {**FIXED, "t_int": 900.0, "radius_rjup": 1.0, "log_vmr_H2O": -3.3, "log_vmr_CH4": -3.4, "log_vmr_CO": -8.0}
HOT = {**FIXED, "t_int": 1800.0, "radius_rjup": 1.0, "log_vmr_H2O": -3.3, "log_vmr_CH4": -30.0, "log_vmr_CO": -3.3}
SNR = 20.0


def _need_tables():
    missing = [n for n in NEEDED if not (TABLES / n).is_file()]
    if missing:
        pytest.skip(f"bundled opacity tables missing in {TABLES}: {', '.join(missing)}")


def _wavelengths():
    return 1.45 * np.exp(np.arange(int(math.log(2.4 / 1.45) * 40) + 1) / 40.0)    # R = 40, H and K bands


def _model(datasets):
    from retrieve.forward_model import ForwardModel, ModelSpec
    spec = ModelSpec.from_mapping({**MODEL, "opacity_dir": str(TABLES)}, "test [model]")
    return ForwardModel(spec, datasets)


def _simulate(truth, seed):
    wl = _wavelengths()
    probe = Dataset("ifs", "spectrum", wl, np.ones(wl.size), np.ones(wl.size), resolving_power=40.0)
    flux = _model([probe]).evaluate(truth).per_dataset["ifs"]
    sigma = np.full(wl.size, np.median(flux) / SNR)       # constant noise: S/N 20 at the median flux
    noisy = flux + sigma * np.random.default_rng(seed).standard_normal(wl.size)
    return Dataset("ifs", "spectrum", wl, noisy, sigma, resolving_power=40.0), flux


def _config(folder, truth, t_range):
    fixed = {k: v for k, v in truth.items() if k not in ("t_int", "radius_rjup", "log_vmr_CH4")}
    lines = ['[object]', 'name = "sim"', '[model]']
    lines += [f'absorbers = {list(ABSORBERS)!r}'.replace("'", '"'), 'profile = "guillot"',
              'cia = ["H2-H2", "H2-He"]', 'hminus = false', 'rayleigh = true', 'layers = 14', 'angles = 1',
              'pressure_range_bar = [1e-4, 30.0]',
              f'opacity_dir = "{TABLES}"', '[parameters]']
    lines += [f"{k} = {v!r}" for k, v in fixed.items()]
    lines += [f't_int = {{ prior = "uniform", low = {t_range[0]}, high = {t_range[1]} }}',
              'radius_rjup = { prior = "uniform", low = 0.6, high = 1.6 }',
              'log_vmr_CH4 = { prior = "uniform", low = -9.0, high = -2.0 }',
              '[[datasets]]', 'name = "ifs"', 'file = "ifs.ecsv"', 'resolving_power = 40.0',
              '[sampler]', 'walkers = 8', 'max_steps = 300', 'check_every = 150', 'seed = 5',
              'optimiser_max_evaluations = 300', 'predictive_draws = 4', 'progress = false']
    path = folder / "fit.toml"
    path.write_text("\n".join(lines) + "\n")
    return path


def _fit_and_identify(folder, truth, t_range, seed):
    """`retrieve fit` then `retrieve identify` from the command line."""
    from retrieve.cli.main import main
    ds, _ = _simulate(truth, seed)
    write_dataset(ds, folder / "ifs.ecsv", overwrite=True)
    config = _config(folder, truth, t_range)
    assert main(["fit", "--config", str(config), "--out", str(folder / "run"), "--no-progress"]) == 0
    assert main(["identify", str(folder / "run"), "--molecules", "CH4", "--band-draws", "16", "--seed", "2",
                 "--max-steps", "300"]) == 0
    return Table.read(folder / "run" / "detections.ecsv"), Table.read(folder / "run" / "bands.ecsv")


@pytest.mark.slow
def test_cool_methane_atmosphere_detects_ch4_in_its_h_and_k_bands(tmp_path, capsys):
    _need_tables()
    det, bands = _fit_and_identify(tmp_path, COOL, (600.0, 1200.0), seed=1)
    out = capsys.readouterr().out
    assert "caveat:" in out and "CH4" in out
    # model-based band depths of the run next to the data's (`retrieve bands --run`)
    from retrieve.cli.main import main
    assert main(["bands", "--run", str(tmp_path / "run"), "--out", str(tmp_path / "idx.ecsv"),
                 "--model-draws", "20", "--draws", "500"]) == 0
    idx = Table.read(tmp_path / "idx.ecsv")
    data_row, model_row = idx[idx["source"] == "data"][0], idx[idx["source"] == "model"][0]
    for name in ("ch4_h", "ch4_k", "h2o_k"):
        # the fitted model reproduces the measured indices within the combined errors (3 sigma)
        tol = 3 * math.hypot(data_row[f"{name}_err"], model_row[f"{name}_err"])
        assert abs(data_row[name] - model_row[name]) < tol, name
    assert data_row["ch4_h"] < 0.5         # deep 1.6 um methane absorption at 900 K
    row = det[det["molecule"] == "CH4"][0]
    assert row["significance_sigma"] > 5.0, row
    assert row["abundance_class"] == "constrained"
    flags = {b["band"]: b["flag"] for b in bands if b["molecule"] == "CH4"}
    assert flags["1.6um"] == "detected" and flags["2.2um"] == "detected", flags


class _Emulator:
    """Real forward-model spectra for a grid of log VMR(CH4), scaled by R² (flux ∝ R² at fixed T)."""

    parameter_names = ["radius_rjup", "log_vmr_CH4"]

    def __init__(self, grid, spectra):
        self.grid, self.spectra = grid, spectra

    def evaluate(self, params):
        from types import SimpleNamespace
        lv = float(np.clip(params["log_vmr_CH4"], self.grid[0], self.grid[-1]))
        i = min(int(np.searchsorted(self.grid, lv)), self.grid.size - 1)
        i = max(i, 1)
        w = (lv - self.grid[i - 1]) / (self.grid[i] - self.grid[i - 1])
        f = (1 - w) * self.spectra[i - 1] + w * self.spectra[i]
        return SimpleNamespace(per_dataset={"ifs": params["radius_rjup"] ** 2 * f})


class _EmulatorFactory:
    def __init__(self, grid, spectra):
        self.grid, self.spectra = grid, spectra

    def __call__(self, object_data):
        return _Emulator(self.grid, self.spectra)


def _grid_posterior_samples(post, axes, n, rng):
    """Exact draws from the posterior tabulated on a grid (inverse CDF over cells; common practice)."""
    mesh = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, len(axes))
    lp = np.array([post(t) for t in mesh])
    prob = np.exp(lp - special.logsumexp(lp))
    idx = rng.choice(mesh.shape[0], size=n, p=prob)
    steps = np.array([a[1] - a[0] for a in axes])
    return mesh[idx] + (rng.uniform(size=(n, len(axes))) - 0.5) * steps


@pytest.mark.slow
def test_hot_atmosphere_without_methane_no_detection_and_false_positive_rate():
    """1800 K, no CH4 in the truth: 20 noise realisations, each with full and reduced evidences.

    The spectra are real forward-model spectra (tabulated over log VMR(CH4) and scaled by R², exact
    for flux ∝ R² at fixed T-P); posterior samples are exact draws from the gridded posterior, so this
    checks the evidence estimator, the significance conversion and the band flags, not the sampler.
    """
    _need_tables()
    from retrieve.analysis.abundance_class import classify_abundance
    from retrieve.analysis.band_catalogue import shipped_catalogue
    from retrieve.analysis.band_flags import band_flags_of_run
    from retrieve.analysis.evidence import evidence_of_run
    from retrieve.analysis.significance import sigma_from_ln_bayes
    from retrieve.inference.likelihood import LogPosterior
    from retrieve.inference.priors import Uniform
    from retrieve.observations import ObjectData
    wl = _wavelengths()
    probe = Dataset("ifs", "spectrum", wl, np.ones(wl.size), np.ones(wl.size), resolving_power=40.0)
    model = _model([probe])
    grid = np.linspace(-9.0, -2.0, 71)
    unit = {**HOT, "radius_rjup": 1.0}
    spectra = np.array([model.evaluate({**unit, "log_vmr_CH4": g}).per_dataset["ifs"] for g in grid])
    clean = model.evaluate(HOT).per_dataset["ifs"]
    factory = _EmulatorFactory(grid, spectra)
    prior_vmr = Uniform(-9.0, -2.0)
    priors_full = {"radius_rjup": Uniform(0.6, 1.6), "log_vmr_CH4": prior_vmr}
    sigma = np.full(wl.size, np.median(clean) / SNR)
    rng = np.random.default_rng(77)
    n_real, sig = 20, []
    r_axis = np.linspace(0.96, 1.04, 31)
    for k in range(n_real):
        ds = Dataset("ifs", "spectrum", wl, clean + sigma * rng.standard_normal(wl.size), sigma)
        od = ObjectData("hot", [ds])
        full = LogPosterior(factory, od, priors_full)
        reduced = LogPosterior(factory, od, {"radius_rjup": Uniform(0.6, 1.6)}, fixed={"log_vmr_CH4": -30.0})
        xs = _grid_posterior_samples(full, [r_axis, np.linspace(-8.93, -2.07, 50)], 800, rng)
        xr = _grid_posterior_samples(reduced, [r_axis], 800, rng)
        samples = {"radius_rjup": xs[:, 0], "log_vmr_CH4": xs[:, 1]}
        z_full = evidence_of_run(full, samples, seed=k)
        z_red = evidence_of_run(reduced, {"radius_rjup": xr[:, 0]}, seed=k)
        sig.append(float(sigma_from_ln_bayes(z_full.ln_z - z_red.ln_z)))
        if k == 0:
            # the first realisation as a single object: no detection, an upper limit, no band detected
            assert sig[0] < 3.0
            assert classify_abundance(xs[:, 1], prior_vmr).label in ("upper limit", "unconstrained")
            flags = band_flags_of_run(full, samples, ["CH4"], shipped_catalogue(), n_draws=30, seed=1)
            assert flags and not any(f.flag == "detected" for f in flags), flags
    false = int(np.sum(np.array(sig) >= 3.0))
    # a 3 sigma threshold stands for a two-tailed p <= 0.0027 (scipy.stats.norm.sf); the Sellke bound makes
    # the stated sigma an upper bound, so false detections are Binomial(20, <= 0.0027) at most:
    # P(>= 2) = 1.4e-3 (scipy.stats.binom.sf), so at most one is allowed
    p3 = 2 * stats.norm.sf(3.0)
    assert stats.binom.sf(1, n_real, p3) < 2e-3
    assert false <= 1, sig
