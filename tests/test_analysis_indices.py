"""Spectral indices from data alone: flat spectra, known absorptions, Monte Carlo errors."""
import math

import numpy as np
import pytest

from retrieve.analysis.band_catalogue import shipped_catalogue
from retrieve.analysis.indices import (BURGASSER_2006, IndexDefinition, from_band, index_of_model, measure_index,
                                       overlap_weights, parse_index_spec)
from retrieve.errors import UserError
from retrieve.observations import Dataset


def _grid(r=40.0, lo=0.95, hi=2.45):
    """Channel centres with constant resolving power (log-spaced), as an R ~ 40 IFS."""
    n = int(math.log(hi / lo) * r) + 1
    return lo * np.exp(np.arange(n) / r)


def _edges(wl):
    mids = 0.5 * (wl[1:] + wl[:-1])
    outer = np.concatenate([[wl[0] - (mids[0] - wl[0])], mids, [wl[-1] + (wl[-1] - mids[-1])]])
    return np.column_stack([outer[:-1], outer[1:]])


def _correlated_cov(wl, sigma, amp=0.4, length=0.05):
    k = amp * np.exp(-0.5 * (wl[:, None] - wl[None, :]) ** 2 / length ** 2) + (1 - amp) * np.eye(wl.size)
    return sigma[:, None] * sigma[None, :] * k


def _delta_method_error(flux, cov, a, b):
    """First-order error propagation of a·F / b·F (common practice, no source)."""
    na, nb = a @ flux, b @ flux
    g = a / nb - na * b / nb ** 2
    return math.sqrt(g @ cov @ g)


def test_noise_free_flat_spectrum_gives_one():
    wl = _grid()
    ds = Dataset("ifs", "spectrum", wl, np.full(wl.size, 3.0), np.full(wl.size, 0.05))
    for d in BURGASSER_2006:
        v = measure_index(ds, d, n_draws=200)
        assert v.value == pytest.approx(1.0, abs=1e-12), d.name   # definition: ratio of mean fluxes


def test_noisy_flat_spectrum_is_one_within_errors_and_mc_error_matches_propagation():
    wl = _grid()
    sigma = np.full(wl.size, 0.03)
    cov = _correlated_cov(wl, sigma)
    rng = np.random.default_rng(12)
    flux = 1.0 + np.linalg.cholesky(cov) @ rng.standard_normal(wl.size)
    ds = Dataset("ifs", "spectrum", wl, flux, sigma, covariance=cov)
    from retrieve.analysis.indices import index_weights
    for d in BURGASSER_2006:
        v = measure_index(ds, d, n_draws=20000, seed=3)
        assert abs(v.value - 1.0) < 3.5 * v.err, (d.name, v.value, v.err)
        a, b = index_weights(_edges(wl), d)
        assert v.err == pytest.approx(_delta_method_error(flux, cov, a, b), rel=0.05, abs=0.0), d.name


def test_known_absorption_recovered_within_one_sigma_at_the_stated_rate():
    # depth d = 0.3 from 1.44 um to the upper edge of the channel holding 1.52 um: covers the H2O-H
    # numerator 1.48-1.52 um and its edge channels, leaves the denominator 1.56-1.60 um untouched
    wl = _grid()
    edges = _edges(wl)
    depth = 0.3
    box_hi = edges[(edges[:, 0] < 1.52) & (edges[:, 1] >= 1.52), 1][0]
    assert box_hi < 1.56
    frac = np.clip(np.minimum(edges[:, 1], box_hi) - np.maximum(edges[:, 0], 1.44), 0, None) / np.diff(edges)[:, 0]
    truth = 1.0 - depth * frac                       # exact channel averages of the boxed spectrum
    sigma = np.full(wl.size, 0.02)
    h2o_h = next(d for d in BURGASSER_2006 if d.name == "h2o_h")
    noise_free = measure_index(Dataset("ifs", "spectrum", wl, truth, sigma), h2o_h, n_draws=100)
    assert noise_free.value == pytest.approx(1.0 - depth, abs=1e-12)
    rng = np.random.default_rng(5)
    hits, devs = 0, []
    n_real = 200
    for k in range(n_real):
        ds = Dataset("ifs", "spectrum", wl, truth + sigma * rng.standard_normal(wl.size), sigma)
        v = measure_index(ds, h2o_h, n_draws=1000, seed=k)
        hits += abs(v.value - (1.0 - depth)) <= v.err
        devs.append(v.value - (1.0 - depth))
    # a calibrated 1-sigma error covers the truth in 68.3 % of realisations; binomial 3-sigma band for
    # n = 200 is +-0.099 (normal distribution, common practice, no source)
    assert abs(hits / n_real - 0.683) < 0.099
    assert abs(np.mean(devs)) < 3 * np.std(devs) / math.sqrt(n_real)


def test_catalogue_band_depth_interpolates_a_sloped_continuum():
    wl = _grid()
    flux = 1.0 + 0.8 * (wl - 1.5)                    # linear continuum, no absorption
    ds = Dataset("ifs", "spectrum", wl, flux, np.full(wl.size, 0.01))
    band = next(b for b in shipped_catalogue() if b.key == ("H2O", "1.4um"))
    d = from_band(band)
    assert d.interpolate
    v = measure_index(ds, d, n_draws=100)
    # a straight line through the two continuum windows reproduces a linear continuum (to channel
    # discretisation), while a plain mean of both windows would not when they are unequally placed
    assert v.value == pytest.approx(1.0, abs=2e-3)


def test_uncovered_window_is_nan_and_photometry_is_skipped():
    wl = _grid(lo=0.95, hi=1.35)                    # J band only
    ds = Dataset("ifs", "spectrum", wl, np.ones(wl.size), np.full(wl.size, 0.1))
    ch4_k = next(d for d in BURGASSER_2006 if d.name == "ch4_k")
    assert math.isnan(measure_index(ds, ch4_k).value)
    phot = Dataset("phot", "photometry", np.array([1.25, 1.65]), np.ones(2), np.full(2, 0.1))
    assert math.isnan(measure_index(phot, BURGASSER_2006[0]).value)
    assert np.isnan(index_of_model(np.ones((3, wl.size)), ds, ch4_k)).all()


def test_overlap_weights_count_partial_channels():
    edges = np.array([[1.0, 1.1], [1.1, 1.2], [1.2, 1.3]])
    w, cov = overlap_weights(edges, ((1.05, 1.25),))
    assert w == pytest.approx([0.05, 0.1, 0.05], rel=1e-6, abs=0.0) and cov == pytest.approx(1.0, rel=1e-6, abs=0.0)
    w, cov = overlap_weights(edges, ((1.25, 1.45),))
    assert cov == pytest.approx(0.25, rel=1e-6, abs=0.0)


def test_user_index_spec():
    d = parse_index_spec("h2o_wide:1.33-1.37/1.26-1.29,1.56-1.60")
    assert d == IndexDefinition("h2o_wide", ((1.33, 1.37),), ((1.26, 1.29), (1.56, 1.60)), source="user-defined")
    for bad in ("nocolon", "x:1.3/1.2", "x:1.4-1.3/1.2-1.25"):
        with pytest.raises(UserError):
            parse_index_spec(bad)
