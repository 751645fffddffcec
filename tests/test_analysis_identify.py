"""End to end: fit -> identify on a toy two-absorber model whose evidences are known by quadrature."""
import math
from types import SimpleNamespace

import numpy as np
import pytest
from astropy.table import Table
from scipy import special

from retrieve.analysis.identify import identify, reduced_config
from retrieve.inference.config import parse_config
from retrieve.inference.run import fit
from retrieve.observations import Dataset
from retrieve.observations.writers import write_dataset

CENTRES = {"X": 1.67, "Y": 1.25}
WIDTH = 0.03
PRIORS = {"c0": (0.5, 1.5), "log_vmr_X": (-8.0, -2.0), "log_vmr_Y": (-8.0, -2.0)}


class TwoAbsorbers:
    """c0 · (1 − Σ_s 1e3·VMR_s·exp(−(λ−λ_s)²/2w²)): 'molecules' X at 1.67 µm and Y at 1.25 µm."""

    parameter_names = ["c0", "log_vmr_X", "log_vmr_Y"]

    def __init__(self, datasets):
        self.wl = {d.name: np.asarray(d.wavelength_um) for d in datasets}

    def evaluate(self, params):
        out = {}
        for n, w in self.wl.items():
            absorb = sum(1e3 * 10.0 ** params[f"log_vmr_{s}"] * np.exp(-0.5 * ((w - c) / WIDTH) ** 2)
                         for s, c in CENTRES.items())
            out[n] = params["c0"] * (1.0 - absorb)
        return SimpleNamespace(per_dataset=out)


class TwoAbsorbersFactory:
    def __call__(self, object_data):
        return TwoAbsorbers(object_data.datasets)


def _config_text():
    lines = ['[object]', 'name = "toy"', '[model]', 'absorbers = ["X", "Y"]', '[parameters]']
    lines += [f'{k} = {{ prior = "uniform", low = {lo}, high = {hi} }}' for k, (lo, hi) in PRIORS.items()]
    lines += ['[[datasets]]', 'name = "ifs"', 'file = "ifs.ecsv"',
              '[sampler]', 'walkers = 12', 'max_steps = 1000', 'check_every = 500', 'seed = 4',
              'optimiser_max_evaluations = 1500', 'predictive_draws = 5', 'progress = false']
    return "\n".join(lines) + "\n"


def _simulate(folder, sigma=0.02, seed=0):
    wl = 1.0 * np.exp(np.arange(int(math.log(2.3) * 40)) / 40.0)
    truth = TwoAbsorbers([SimpleNamespace(name="ifs", wavelength_um=wl)]).evaluate(
        {"c0": 1.0, "log_vmr_X": -3.6, "log_vmr_Y": -30.0}).per_dataset["ifs"]
    flux = truth + sigma * np.random.default_rng(seed).standard_normal(wl.size)
    ds = Dataset("ifs", "spectrum", wl, flux, np.full(wl.size, sigma))
    write_dataset(ds, folder / "ifs.ecsv", overwrite=True)
    return ds


def _grid_log_evidence(ds, free):
    """ln Z by quadrature on a grid over the free parameters (uniform priors; common practice, no source).

    The model is linear in c0, so chi2(c0) = A - 2 c0 B + c0^2 C with A, B, C summed once per
    (log VMR_X, log VMR_Y) node.
    """
    axes = {k: np.linspace(*PRIORS[k], 161 if k == "c0" else 241) for k in free}
    wl, y, sig = ds.wavelength_um, ds.flux, ds.uncertainty
    g = {s: np.exp(-0.5 * ((wl - c) / WIDTH) ** 2) for s, c in CENTRES.items()}
    lv = {s: axes.get(f"log_vmr_{s}", np.array([-30.0])) for s in CENTRES}
    shape = 1.0 - (1e3 * 10.0 ** lv["X"][:, None, None] * g["X"] + 1e3 * 10.0 ** lv["Y"][None, :, None] * g["Y"])
    w = 1.0 / sig ** 2
    a_, b_, c_ = np.sum(y * y * w), shape @ (y * w), (shape * shape) @ w
    c0 = axes["c0"][:, None, None]
    log_l = -0.5 * (a_ - 2 * c0 * b_ + c0 ** 2 * c_) - np.sum(np.log(np.sqrt(2 * np.pi) * sig))
    log_int = special.logsumexp(log_l)
    for k, ax in axes.items():
        log_int += math.log(ax[1] - ax[0]) - math.log(PRIORS[k][1] - PRIORS[k][0])
    return log_int


@pytest.mark.slow
def test_identify_matches_quadrature_bayes_factors(tmp_path):
    ds = _simulate(tmp_path)
    (tmp_path / "fit.toml").write_text(_config_text())
    from retrieve.inference.config import load_config
    cfg = load_config(tmp_path / "fit.toml")
    factory = TwoAbsorbersFactory()
    fit(cfg, out_dir=tmp_path / "run", model_factory=factory, progress=False)
    cat = tmp_path / "toy_bands.toml"
    cat.write_text("".join(f'''
[[band]]
molecule = "{m}"
band = "{c}um"
center_um = {c}
window_um = [{c - 0.06:.3f}, {c + 0.06:.3f}]
source = "test band of the toy model"
''' for m, c in CENTRES.items()))
    res = identify(tmp_path / "run", workers=2, model_factory=factory, band_draws=20, seed=1, band_catalogue=cat)

    det = Table.read(tmp_path / "run" / "detections.ecsv")
    assert list(det["molecule"]) == ["X", "Y"]
    assert "Sellke" in det.meta["caveat"]
    full = _grid_log_evidence(ds, ["c0", "log_vmr_X", "log_vmr_Y"])
    for mol in ("X", "Y"):
        reduced = _grid_log_evidence(ds, ["c0"] + [f"log_vmr_{m}" for m in "XY" if m != mol])
        row = det[det["molecule"] == mol][0]

        assert row["ln_z_full"] == pytest.approx(full, abs=max(0.15, 4 * row["ln_z_full_err"]))
        assert row["ln_bayes_factor"] == pytest.approx(full - reduced, abs=max(0.2, 4 * row["ln_bayes_factor_err"]))
    x, y = det[det["molecule"] == "X"][0], det[det["molecule"] == "Y"][0]
    assert x["significance_sigma"] > 5 and x["abundance_class"] == "constrained"
    assert abs(x["log_vmr_median"] - (-3.6)) < 3 * (x["log_vmr_hi"] - x["log_vmr_lo"])
    assert y["significance_sigma"] < 2 and y["abundance_class"] == "upper limit" and y["upper_limit_95"] < -3.6

    bands = Table.read(tmp_path / "run" / "bands.ecsv")
    assert set(bands.colnames) >= {"molecule", "band", "center_um", "window_lo_um", "window_hi_um", "flag",
                                   "significance_sigma", "channels"}
    assert len(res.bands) == len(bands)
    flag = {str(r["molecule"]): str(r["flag"]) for r in bands}
    assert flag == {"X": "detected", "Y": "not detected"}, flag
    # the spectrum figure shades exactly the detected bands (FIGURES' reader of bands.ecsv)
    from retrieve.plotting.spectrum_plot import flagged_bands
    shaded = {(m, b) for m, b, _, _ in flagged_bands(bands)}
    assert shaded == {(str(r["molecule"]), str(r["band"])) for r in bands if r["flag"] == "detected"}

    assert np.all(np.isnan(det["ln_bayes_factor_nested"]))     # cross-check not asked for

    # a second call reuses the finished reduced fits (same configuration digest); with the dynesty
    # cross-check (Speagle 2020, MNRAS 493, 3132) both estimates of ln B agree within their errors
    pytest.importorskip("dynesty")
    chain_y = tmp_path / "run" / "identify" / "without_Y" / "chain.h5"
    stamp = chain_y.stat().st_mtime_ns
    again = identify(tmp_path / "run", workers=1, model_factory=factory, band_draws=20, seed=1, proposal="mixture",
                     molecules=["Y"], nested_live_points=40)
    y_again = again.detections[0]
    assert chain_y.stat().st_mtime_ns == stamp                     # reused, not refitted
    # the mixture proposal gives the same evidence within the quoted errors
    first = res.detections[res.detections["molecule"] == "Y"][0]
    assert abs(y_again["ln_z_reduced"] - first["ln_z_reduced"]) < 4 * math.hypot(y_again["ln_z_reduced_err"],
                                                                                first["ln_z_reduced_err"])
    tol = 3 * math.hypot(y_again["ln_bayes_factor_err"], y_again["ln_bayes_factor_nested_err"])
    assert abs(y_again["ln_bayes_factor"] - y_again["ln_bayes_factor_nested"]) < tol


def test_reduced_config_fixes_the_molecule(tmp_path):
    cfg = parse_config(__import__("tomllib").loads(_config_text()), base_dir=tmp_path)
    red = reduced_config(cfg, "X")
    assert "log_vmr_X" not in red.free and red.fixed["log_vmr_X"] == -30.0
    assert list(red.free) == ["c0", "log_vmr_Y"] and red.digest != cfg.digest
    from retrieve.errors import UserError
    with pytest.raises(UserError):
        reduced_config(red, "X")
