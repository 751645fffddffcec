"""Synthetic opacity tables and a small real ForwardModel set-up shared by the inference tests.

The tables are demo data (a smooth made-up H2O cross-section pattern); they
only give the forward model something to interpolate.
"""
from pathlib import Path

import numpy as np

from retrieve.observations import Dataset
from retrieve.observations.writers import write_dataset
from retrieve.opacity.table import OpacityTable, write_table

T_MAX = 3000.0
W_RANGE = (0.8, 2.6)
TRUTH = {"log_g": 4.0, "radius_rjup": 1.1, "distance_pc": 10.0, "t_iso": 1300.0, "log_vmr_H2O": -3.5}

MODEL_TOML = """
[object]
name = "synthetic"

[model]
absorbers = ["H2O"]
profile = "isothermal"
cia = []
hminus = false
rayleigh = false
layers = 12
opacity_dir = "tables"

[parameters]
log_g = 4.0
distance_pc = 10.0
radius_rjup = { prior = "uniform", low = 0.5, high = 2.0 }
t_iso = { prior = "uniform", low = 800.0, high = 2000.0 }
log_vmr_H2O = { prior = "uniform", low = -6.0, high = -2.0 }

[[datasets]]
name = "ifs"
file = "ifs.ecsv"

[sampler]
max_steps = 200
check_every = 100
seed = 3
optimiser_max_evaluations = 600
predictive_draws = 20
progress = false
"""


def write_tables(folder: Path) -> Path:
    """One synthetic H2O cross-section table on 300–3000 K, 1e-6–1e3 bar, 0.8–2.6 µm."""
    folder.mkdir(parents=True, exist_ok=True)
    w = np.linspace(*W_RANGE, 240)
    t = np.array([300.0, 1000.0, 2000.0, T_MAX])
    p = np.logspace(-6, 3, 4)
    band = -21.0 + 1.5 * np.sin(2 * np.pi * w / 0.4)
    data = np.broadcast_to(band + 0.1 * np.log10(t / 1000.0)[:, None], (4, 4, w.size)).astype(np.float32)
    write_table(OpacityTable("cross_section", "H2O", w, t, data, pressure_bar=p,
                             provenance={"demo": "synthetic pattern for tests"}), folder / "H2O.xsec.h5")
    return folder


def simulate(folder: Path, params=None, n: int = 16, lo: float = 1.0, hi: float = 1.7, snr: float = 30.0,
             seed: int = 0, name: str = "ifs", layers: int = 12) -> Path:
    """Simulated spectrum from the real ForwardModel on the synthetic tables, written to ``folder/<name>.ecsv``."""
    from retrieve.forward_model import ForwardModel, ModelSpec
    from retrieve.opacity.opacity_set import OpacitySet

    params = {**TRUTH, **(params or {})}
    wl = np.linspace(lo, hi, n)
    probe = Dataset(name, "spectrum", wl, np.ones(n), np.ones(n), resolving_power=40.0)
    spec = ModelSpec.from_mapping({"absorbers": ["H2O"], "profile": "isothermal", "cia": [], "hminus": False,
                                   "rayleigh": False, "layers": layers}, "sim")
    model = ForwardModel(spec, [probe], opacity=OpacitySet.load(["H2O"], [], folder / "tables"))
    flux = model.evaluate(params).per_dataset[name]
    sigma = flux / snr
    noisy = flux + np.random.default_rng(seed).normal(0.0, sigma)
    path = folder / f"{name}.ecsv"
    write_dataset(Dataset(name, "spectrum", wl, noisy, sigma, resolving_power=40.0), path, overwrite=True,
                  meta={"truth": params})
    return path


def make_case(folder: Path, toml: str = MODEL_TOML) -> Path:
    """Tables, a simulated spectrum and a fit configuration in ``folder``; returns the config path."""
    write_tables(folder / "tables")
    simulate(folder)
    cfg = folder / "fit.toml"
    cfg.write_text(toml)
    return cfg


def test_synthetic_case_builds_and_the_model_reproduces_its_noise_free_flux(tmp_path):
    from retrieve.inference.config import load_config
    from retrieve.inference.run import build_posterior, read_datasets

    cfg = load_config(make_case(tmp_path))
    od = read_datasets(cfg)
    post, model = build_posterior(cfg, od)
    out = model.evaluate(TRUTH).per_dataset["ifs"]
    d = od["ifs"]
    # the simulated data scatter about the model by their stated uncertainty: χ²/n ≈ 1 (common practice, no source)
    chi2 = np.sum((d.flux - out) ** 2 / d.uncertainty ** 2) / d.n_points
    assert 0.3 < chi2 < 2.5
    assert post.param_names == ["radius_rjup", "t_iso", "log_vmr_H2O"]
