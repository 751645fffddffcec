"""A tiny demo survey: made-up opacity table, simulated spectra, fit configuration and catalogue.

Everything here is **demo data**: one synthetic H2O cross-section table
(a smooth sinusoidal pattern, not a molecule) on a coarse grid, and spectra
simulated with the real :class:`~retrieve.forward_model.ForwardModel` on it.
It exists so that ``retrieve batch`` can be tried, tested and benchmarked in
seconds per object; its numbers mean nothing physically.

>>> from retrieve.survey.demo import make_demo_survey
>>> paths = make_demo_survey("demo_survey", n_objects=4)          # doctest: +SKIP
>>> # retrieve batch demo_survey/catalogue.ecsv --config demo_survey/fit.toml --out demo_survey/out
"""
from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
from astropy.table import Table

DEMO_TRUTH = {"log_g": 4.0, "radius_rjup": 1.1, "distance_pc": 10.0, "t_iso": 1300.0, "log_vmr_H2O": -3.5}
_MODEL = {"absorbers": ["H2O"], "profile": "isothermal", "cia": [], "hminus": False, "rayleigh": False,
          "layers": 10, "angles": 2}

DEMO_TOML = """\
# Demo fit configuration for a tiny survey (synthetic opacity; see retrieve/survey/demo.py).
[object]
name = "demo"

[model]
absorbers = ["H2O"]
profile = "isothermal"
cia = []
hminus = false
rayleigh = false
layers = 10
angles = 2
opacity_dir = "tables"

[parameters]
log_g = 4.0
distance_pc = 10.0
radius_rjup = {{ prior = "uniform", low = 0.5, high = 2.0 }}
t_iso = {{ prior = "uniform", low = 800.0, high = 2000.0 }}
log_vmr_H2O = {{ prior = "uniform", low = -6.0, high = -2.0 }}

[[datasets]]
name = "ifs"

[sampler]
walkers = 8
max_steps = {max_steps}
check_every = {check_every}
seed = 11
optimiser_max_evaluations = {optimiser_evaluations}
predictive_draws = 8
progress = false
"""


@dataclasses.dataclass
class DemoSurvey:
    """Paths of a demo survey written by :func:`make_demo_survey`."""

    folder: Path
    config: Path
    catalogue: Path
    spectra: list


def write_demo_table(folder) -> Path:
    """The synthetic H2O cross-section table (300–3000 K, 1e-6–1e3 bar, 0.8–2.6 µm), ``folder/H2O.xsec.h5``."""
    from ..opacity.table import OpacityTable, write_table
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    w = np.linspace(0.8, 2.6, 160)
    t = np.array([300.0, 1000.0, 2000.0, 3000.0])
    p = np.logspace(-6, 3, 4)
    band = -21.0 + 1.5 * np.sin(2 * np.pi * w / 0.4)
    data = np.broadcast_to(band + 0.1 * np.log10(t / 1000.0)[:, None], (p.size, t.size, w.size))
    table = OpacityTable("cross_section", "H2O", w, t, data.astype(np.float32), pressure_bar=p,
                         provenance={"demo": "synthetic sinusoidal pattern for survey demos and tests"})
    path = folder / "H2O.xsec.h5"
    write_table(table, path)
    return path


def simulate_demo_spectrum(table_dir, path, params=None, n_channels: int = 12, snr: float = 25.0,
                           seed: int = 0, name: str = "ifs") -> Path:
    """Write a noisy spectrum (R = 40, 1.0–1.7 µm) simulated on the demo table to ``path`` (ECSV)."""
    from ..forward_model import ForwardModel, ModelSpec
    from ..observations import Dataset
    from ..observations.writers import write_dataset
    from ..opacity.opacity_set import OpacitySet

    params = {**DEMO_TRUTH, **(params or {})}
    wl = np.linspace(1.0, 1.7, n_channels)
    probe = Dataset(name, "spectrum", wl, np.ones(n_channels), np.ones(n_channels), resolving_power=40.0)
    model = ForwardModel(ModelSpec.from_mapping(_MODEL, "demo"), [probe],
                         opacity=OpacitySet.load(["H2O"], [], Path(table_dir)))
    flux = model.evaluate(params).per_dataset[name]
    sigma = flux / snr
    noisy = flux + np.random.default_rng(seed).normal(0.0, sigma)
    ds = Dataset(name, "spectrum", wl, noisy, sigma, resolving_power=40.0)
    Path(path).parent.mkdir(parents=True, exist_ok=True)
    return write_dataset(ds, path, overwrite=True, meta={"dataset_name": name, "truth": params})


def make_demo_survey(folder, n_objects: int = 3, max_steps: int = 40, check_every: int = 20,
                     optimiser_evaluations: int = 150, seed: int = 0) -> DemoSurvey:
    """Table, ``n_objects`` simulated spectra, ``fit.toml`` and ``catalogue.ecsv`` in ``folder``.

    Objects ``demo_00 …`` differ in temperature and radius; each catalogue
    row fixes its distance (``distance_pc``) to show a per-object override.
    """
    folder = Path(folder)
    write_demo_table(folder / "tables")
    rng = np.random.default_rng(seed)
    names, spectra, dist = [], [], []
    for i in range(n_objects):
        truth = {"t_iso": float(rng.uniform(1000.0, 1700.0)), "radius_rjup": float(rng.uniform(0.9, 1.4)),
                 "distance_pc": float(rng.uniform(8.0, 30.0))}
        name = f"demo_{i:02d}"
        spec = simulate_demo_spectrum(folder / "tables", folder / "spectra" / f"{name}.ecsv", truth, seed=seed + i)
        names.append(name)
        spectra.append(spec)
        dist.append(truth["distance_pc"])
    cfg = folder / "fit.toml"
    cfg.write_text(DEMO_TOML.format(max_steps=max_steps, check_every=check_every,
                                    optimiser_evaluations=optimiser_evaluations), encoding="utf-8")
    cat = Table()
    cat["object"] = names
    cat["spectra"] = [f"ifs=spectra/{n}.ecsv" for n in names]
    cat["distance_pc"] = dist
    cat["distance_pc"].unit = "pc"
    cat.meta["description"] = "demo survey catalogue (synthetic spectra)"
    cat_path = folder / "catalogue.ecsv"
    cat.write(cat_path, format="ascii.ecsv", overwrite=True)
    return DemoSurvey(folder, cfg, cat_path, spectra)
