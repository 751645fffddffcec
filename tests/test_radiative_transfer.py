"""Checks of the emission solver against analytic results and astropy."""
import warnings

import astropy.units as u
import numpy as np
import pytest
from astropy.modeling.physical_models import BlackBody

from retrieve.radiative_transfer import (PlanckCache, emission_flux, gauss_legendre_mu, planck_lambda)

PER_UM = u.W / (u.m ** 2 * u.um * u.sr)


def test_planck_matches_astropy():
    wl = np.geomspace(0.3, 300.0, 400)
    temps = np.array([50.0, 300.0, 1500.0, 6000.0])
    ours = planck_lambda(wl, temps)
    for t, row in zip(temps, ours):
        with np.errstate(over="ignore"):   # astropy overflows to 0 where hc/λkT > 709
            ref = BlackBody(temperature=t * u.K, scale=1.0 * PER_UM)(wl * u.um).to_value(PER_UM)
        # astropy.modeling.physical_models.BlackBody (same CODATA constants); below 1e-280
        # we deliberately return a tiny value instead of overflowing (hc/λkT capped at 700)
        np.testing.assert_allclose(row, ref, rtol=1e-10, atol=1e-280)
    np.testing.assert_allclose(PlanckCache(wl)(temps), ours, rtol=1e-11)  # same formula, other rounding


def test_planck_is_overflow_safe():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        b = planck_lambda(np.array([0.3, 1.0, 5.0]), np.array([5.0, 20.0]))
    # hc/(λkT) ~ 9600 at 0.3 µm and 5 K: B is numerically zero but must be finite, not NaN/inf
    # (common practice, no source)
    assert np.all(np.isfinite(b)) and np.all(b >= 0)
    assert b[0, 0] < 1e-290


def test_gauss_legendre_on_unit_interval():
    mu, w = gauss_legendre_mu(4)
    assert np.all((mu > 0) & (mu < 1))
    # ∫0^1 μ^k dμ = 1/(k+1) exactly for k <= 2n-1 (Gauss–Legendre; common practice, no source)
    for k in range(8):
        assert np.sum(w * mu ** k) == pytest.approx(1.0 / (k + 1), rel=1e-13, abs=0.0)


def _deep_grid(n_levels=120, tau_max=80.0):
    tau = np.concatenate([[0.0], np.geomspace(1e-6, tau_max, n_levels - 1)])
    return tau, np.diff(tau)


@pytest.mark.parametrize("n_mu", [3, 4, 16])
def test_linear_source_is_integrated_exactly(n_mu):
    # For S = a + b τ in a semi-infinite atmosphere the emergent intensity is a + b μ
    # (Eddington–Barbier, exact for a linear source; Mihalas 1978, Stellar Atmospheres, ch. 2),
    # so F = 2π ∫ (a + b μ) μ dμ = π a + 2π b / 3.
    tau, dtau = _deep_grid()
    a, b = np.array([2.0, 0.5, 7.0]), np.array([3.0, 10.0, 0.0])
    planck = a[None, :] + b[None, :] * tau[:, None]
    dtau = np.repeat(dtau[:, None], 3, axis=1)
    mu, w = gauss_legendre_mu(n_mu)
    flux = emission_flux(planck, dtau, mu, w)
    expected = np.pi * a + 2.0 * np.pi * b / 3.0
    # residual e^{-80/μ_min} of the bottom boundary is far below the tolerance
    np.testing.assert_allclose(flux, expected, rtol=1e-12)
    flux2, contrib = emission_flux(planck, dtau, mu, w, contribution=True)
    np.testing.assert_allclose(flux2, expected, rtol=1e-12)
    np.testing.assert_allclose(contrib.sum(axis=0), flux2, rtol=1e-14)


def test_layer_form_equals_telescoped_form():
    rng = np.random.default_rng(3)
    n_l, n_w = 60, 50
    planck = rng.uniform(0.5, 2.0, (n_l, n_w)).cumsum(axis=0)
    dtau = 10.0 ** rng.uniform(-14, 2, (n_l - 1, n_w))
    mu, w = gauss_legendre_mu(5)
    fast = emission_flux(planck, dtau, mu, w)
    slow, contrib = emission_flux(planck, dtau, mu, w, contribution=True)
    # two algebraically identical forms of the same formal solution (module docstring)
    np.testing.assert_allclose(fast, slow, rtol=1e-10)
    assert np.all(contrib >= 0)   # emission terms of a positive source are positive (common practice, no source)


def test_transparent_atmosphere_shows_the_bottom_boundary():
    # no opacity at all: the emergent intensity is the boundary's B in every direction,
    # F = π B_bottom (common practice, no source); also no 0/0 for dτ = 0
    planck = np.linspace(1.0, 4.0, 10)[:, None] * np.ones((1, 3))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        flux = emission_flux(planck, np.zeros((9, 3)), *gauss_legendre_mu(4))
        flux2, _ = emission_flux(planck, np.zeros((9, 3)), *gauss_legendre_mu(4), contribution=True)
    np.testing.assert_allclose(flux, np.pi * 4.0, rtol=1e-13)
    np.testing.assert_allclose(flux2, np.pi * 4.0, rtol=1e-13)
