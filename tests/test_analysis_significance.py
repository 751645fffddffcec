"""Bayes factor -> equivalent significance (Benneke & Seager 2013, after Sellke et al. 2001)."""
import math

import numpy as np
import pytest
from scipy import optimize, stats

from retrieve.analysis.significance import (ln_bayes_from_sigma, p_value_from_ln_bayes, sigma_from_ln_bayes)


@pytest.mark.parametrize("ln_b, sigma", [(0.9, 2.0), (2.5, 2.7), (5.0, 3.6), (11.0, 5.0)])
def test_benneke_seager_table(ln_b, sigma):
    # Benneke & Seager (2013, ApJ 778, 153), Table 2: ln B = 0.9 / 2.5 / 5.0 -> 2.0 / 2.7 / 3.6 sigma
    # (value from memory); 5 sigma needs ln B ~ 11 (value from memory, same table's extension)
    assert sigma_from_ln_bayes(ln_b) == pytest.approx(sigma, abs=0.07)


@pytest.mark.parametrize("ln_b", [0.05, 0.5, 1.0, 3.0, 8.0, 20.0, 60.0])
def test_matches_root_of_sellke_bound(ln_b):
    # Sellke, Bayarri & Berger (2001, Am. Stat. 55, 62): B = -1/(e p ln p) for p < 1/e;
    # solved here independently with scipy.optimize.brentq in ln p, sigma from scipy.stats.norm.isf
    f = lambda u: -1.0 - u - math.log(-u) - ln_b       # ln of the bound minus ln B, u = ln p
    u = optimize.brentq(f, -1e4, -1.0 - 1e-15)
    assert math.log(p_value_from_ln_bayes(ln_b)) == pytest.approx(u, rel=1e-9, abs=0.0)
    assert sigma_from_ln_bayes(ln_b) == pytest.approx(stats.norm.isf(math.exp(u) / 2), rel=1e-8, abs=0.0)


def test_no_evidence_maps_to_zero_and_is_monotone():
    assert sigma_from_ln_bayes(0.0) == 0.0 and sigma_from_ln_bayes(-3.0) == 0.0
    assert p_value_from_ln_bayes(-1.0) == pytest.approx(math.exp(-1), rel=1e-6, abs=0.0)   # the bound's end point p = 1/e
    grid = np.linspace(0.01, 900, 4000)
    s = sigma_from_ln_bayes(grid)
    assert np.all(np.diff(s) > 0) and np.all(np.isfinite(s))
    assert math.isnan(sigma_from_ln_bayes(math.nan))


def test_inverse_round_trip():
    ln_b = np.array([0.1, 1.0, 4.0, 30.0, 650.0])
    assert ln_bayes_from_sigma(sigma_from_ln_bayes(ln_b)) == pytest.approx(ln_b, rel=1e-6, abs=0.0)
    # below sigma(p = 1/e) = 0.90 there is no Bayes factor above 1
    assert math.isnan(ln_bayes_from_sigma(0.5))
