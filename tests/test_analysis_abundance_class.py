"""Abundance classification of log-VMR posteriors on posteriors with known shapes."""
import math

import numpy as np
import pytest
from scipy import integrate, optimize, stats

from retrieve.analysis.abundance_class import classify_abundance
from retrieve.inference.priors import Gaussian, Uniform

PRIOR = Uniform(-12.0, -1.0)


def _sample_density(logpdf, lo, hi, n, seed):
    """Inverse-CDF draws from a 1-D density on [lo, hi] (numerical CDF, common practice, no source)."""
    grid = np.linspace(lo, hi, 20001)
    pdf = np.exp(logpdf(grid))
    cdf = np.concatenate([[0], np.cumsum(0.5 * (pdf[1:] + pdf[:-1]) * np.diff(grid))])
    cdf /= cdf[-1]
    return np.interp(np.random.default_rng(seed).uniform(size=n), cdf, grid)


def test_gaussian_posterior_is_constrained_with_its_interval():
    x = np.random.default_rng(1).normal(-4.0, 0.3, 4000)
    c = classify_abundance(x, PRIOR)
    assert c.label == "constrained"
    # 16/84 % of N(-4, 0.3): -4 -+ 0.3 (scipy.stats.norm.ppf), to sampling accuracy
    assert c.lo == pytest.approx(stats.norm.ppf(0.16, -4, 0.3), abs=0.03)
    assert c.hi == pytest.approx(stats.norm.ppf(0.84, -4, 0.3), abs=0.03)
    assert math.isnan(c.upper_limit_95)


def test_flat_lower_tail_is_upper_limit_with_95_percent_quantile():
    # density flat up to -6 then falling off as a logistic of width 0.3 dex
    logpdf = lambda v: -np.logaddexp(0.0, (v + 6.0) / 0.3)
    x = _sample_density(logpdf, -12.0, -1.0, 4000, seed=2)
    c = classify_abundance(x, PRIOR)
    assert c.label == "upper limit"
    norm = integrate.quad(lambda v: math.exp(logpdf(v)), -12, -1)[0]
    q95 = optimize.brentq(lambda t: integrate.quad(lambda v: math.exp(logpdf(v)), -12, t)[0] / norm - 0.95, -12, -1)
    assert c.upper_limit_95 == pytest.approx(q95, abs=0.1)      # scipy quad + brentq on the known density


def test_mirror_image_is_lower_limit():
    logpdf = lambda v: -np.logaddexp(0.0, -(v + 4.0) / 0.3)
    x = _sample_density(logpdf, -12.0, -1.0, 4000, seed=3)
    c = classify_abundance(x, PRIOR)
    assert c.label == "lower limit" and c.lower_limit_95 > -5.5


def test_prior_shaped_posteriors_are_unconstrained():
    rng = np.random.default_rng(4)
    assert classify_abundance(rng.uniform(-12, -1, 4000), PRIOR).label == "unconstrained"
    # Gaussian prior returned unchanged: both tails fall off, but the posterior is as wide as the prior
    g = Gaussian(-5.0, 1.0)
    assert classify_abundance(rng.normal(-5.0, 1.0, 4000), g).label == "unconstrained"
    assert classify_abundance(rng.normal(-5.0, 0.2, 4000), g).label == "constrained"


def test_bounds_instead_of_prior_and_errors():
    x = np.random.default_rng(5).normal(-4.0, 0.3, 1000)
    assert classify_abundance(x, bounds=(-12, -1)).label == "constrained"
    with pytest.raises(ValueError):
        classify_abundance(x)
    with pytest.raises(ValueError):
        classify_abundance(x[:5], PRIOR)
