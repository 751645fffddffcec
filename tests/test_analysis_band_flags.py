"""Band flags from full-minus-reduced model differences, on a toy absorber with a known imprint."""
import math
from types import SimpleNamespace

import numpy as np
import pytest
from scipy import stats

from retrieve.analysis.band_catalogue import Band
from retrieve.analysis.band_flags import (band_channels, band_flags_of_run, chi2_sigma, flag_of,
                                          format_channels)
from retrieve.inference.likelihood import LogPosterior
from retrieve.inference.priors import Uniform
from retrieve.observations import Dataset, ObjectData

CENTRE, WIDTH = 1.67, 0.03


class ToyAbsorber:
    """Continuum c0 times (1 - 1e3 VMR exp(-(λ-1.67)²/2w²)): the 'molecule' X absorbs near 1.67 µm."""

    parameter_names = ["c0", "log_vmr_X"]

    def __init__(self, datasets):
        self.wl = {d.name: np.asarray(d.wavelength_um) for d in datasets}

    def evaluate(self, params):
        depth = 1e3 * 10.0 ** params["log_vmr_X"]
        return SimpleNamespace(per_dataset={
            n: params["c0"] * (1.0 - depth * np.exp(-0.5 * ((w - CENTRE) / WIDTH) ** 2)) for n, w in self.wl.items()})


class ToyFactory:
    def __call__(self, object_data):
        return ToyAbsorber(object_data.datasets)


def _setup(cov_amp=0.3):
    wl = 1.0 * np.exp(np.arange(int(math.log(2.4) * 40)) / 40.0)      # R = 40 channels, 1.0-2.4 um
    sigma = np.full(wl.size, 0.02)
    k = cov_amp * np.exp(-0.5 * (wl[:, None] - wl[None, :]) ** 2 / 0.04 ** 2) + (1 - cov_amp) * np.eye(wl.size)
    cov = sigma[:, None] * sigma[None, :] * k
    ds = Dataset("ifs", "spectrum", wl, np.ones(wl.size), sigma, covariance=cov)
    post = LogPosterior(ToyFactory(), ObjectData("toy", [ds]),
                        {"c0": Uniform(0.5, 1.5), "log_vmr_X": Uniform(-8, -2)})
    return ds, post


BANDS = [Band("X", "1.67um", 1.67, 1.60, 1.75, ((1.55, 1.59),), "test"),
         Band("X", "1.2um", 1.20, 1.15, 1.25, (), "test"),
         Band("X", "3.3um", 3.3, 3.2, 3.4, (), "test")]


def test_band_significance_equals_direct_chi2_of_the_difference():
    ds, post = _setup()
    rng = np.random.default_rng(0)
    samples = {"c0": rng.normal(1.0, 0.01, 40), "log_vmr_X": rng.normal(-3.7, 0.05, 40)}
    rows = {r.band: r for r in band_flags_of_run(post, samples, ["X"], BANDS, n_draws=40, seed=1)}
    idx = band_channels(ds, BANDS[0])
    c_inv = np.linalg.inv(ds.covariance[np.ix_(idx, idx)])
    chi2 = []
    for c0, lv in zip(samples["c0"], samples["log_vmr_X"]):
        delta = -c0 * 1e3 * 10 ** lv * np.exp(-0.5 * ((ds.wavelength_um[idx] - CENTRE) / WIDTH) ** 2)
        chi2.append(delta @ c_inv @ delta)
    med = float(np.median(chi2))
    # equivalent sigma of the chi2 upper tail (scipy.stats.chi2.sf and norm.isf)
    expect = stats.norm.isf(stats.chi2.sf(med, idx.size) / 2)
    r = rows["1.67um"]
    assert r.chi2 == pytest.approx(med, rel=1e-8, abs=0.0)
    assert r.significance_sigma == pytest.approx(expect, rel=1e-6, abs=0.0)
    assert r.flag == "detected" and r.n_channels == idx.size
    assert rows["1.2um"].flag == "not detected" and rows["1.2um"].significance_sigma < 1.0
    # channels carrying the signal are the ones next to 1.67 um
    carried = [int(i) for part in r.channels.split(":")[1].split(",") for i in
               (range(int(part.split("-")[0]), int(part.split("-")[-1]) + 1))]
    assert all(abs(ds.wavelength_um[i] - CENTRE) < 3 * WIDTH + 0.03 for i in carried) and carried
    assert "3.3um" not in rows           # outside the data: not listed for this fit


def test_weak_absorber_is_tentative_or_not_detected():
    ds, post = _setup()
    samples = {"c0": np.full(10, 1.0), "log_vmr_X": np.full(10, -5.0)}     # depth 1 % at S/N 50
    (r,) = [r for r in band_flags_of_run(post, samples, ["X"], BANDS[:1], n_draws=10) if r.band == "1.67um"]
    assert r.flag in ("not detected", "tentative") and r.significance_sigma < 3


def test_flag_thresholds_and_chi2_conversion():
    assert flag_of(3.0, 4) == "detected" and flag_of(2.5, 4) == "tentative" and flag_of(1.9, 4) == "not detected"
    assert flag_of(math.nan, 0) == "not covered"
    # chi2 with 1 dof: sigma = sqrt(chi2) (a one-dof chi2 is a squared normal deviate; common practice)
    assert chi2_sigma(9.0, 1) == pytest.approx(3.0, rel=1e-9, abs=0.0)
    assert chi2_sigma(200.0, 5) == pytest.approx(stats.norm.isf(stats.chi2.sf(200.0, 5) / 2), rel=1e-6, abs=0.0)
    # far tail where scipy's logsf underflows: continuous with it and growing like sqrt(chi2)
    # (for 1 dof, sigma = sqrt(chi2) exactly: a one-dof chi2 is a squared normal deviate)
    assert chi2_sigma(1e6, 1) == pytest.approx(1e3, rel=1e-4, abs=0.0)
    s = chi2_sigma(np.array([1400.0, 1500.0, 3000.0, 1e5]), 4)
    assert np.all(np.isfinite(s)) and np.all(np.diff(s) > 0)


def test_channel_strings_and_channel_selection():
    assert format_channels({"ifs": [12, 13, 14, 17], "phot": [2], "empty": []}) == "ifs:12-14,17;phot:2"
    ds = Dataset("d", "spectrum", np.array([1.0, 1.1, 1.2, 1.3]), np.ones(4), np.ones(4))
    band = Band("X", "b", 1.12, 1.08, 1.16, (), "t")
    # channel 1 spans 1.05-1.15 (overlap 0.07 >= half), channel 2 spans 1.15-1.25 (0.01 < half)
    assert list(band_channels(ds, band)) == [1]
    phot = Dataset("p", "photometry", np.array([1.25, 1.63, 2.15]), np.ones(3), np.ones(3))
    assert list(band_channels(phot, Band("X", "h", 1.6, 1.5, 1.7, (), "t"))) == [1]
