"""Thermal emission without scattering: formal solution with a linear-in-τ source.

Scheme
------
For each direction μ (Gauss–Legendre nodes mapped to [0, 1]; ``angles``
nodes, default 4, which integrates the smooth μ-dependence of the outgoing
intensity to better than 0.1 % for the profiles used here) the upward
intensity is propagated from the bottom boundary, where it equals the Planck
function of the deepest level, to the top, where nothing is incident from
above.  Within each layer the source function S = B_λ(T) is taken linear in
optical depth between the levels, and the formal solution is integrated
exactly for that S (e.g. Mihalas 1978, *Stellar Atmospheres*, 2nd ed., ch. 2;
common practice in emission codes).  For a layer of slant optical thickness
Δ = dτ/μ with source B_top at its top and B_bot at its bottom::

    I_top = I_bot e^{-Δ} + B_top (1 - e^{-Δ}) + (B_bot - B_top) [(1 - e^{-Δ})/Δ - e^{-Δ}]

Unrolled from the bottom, the emergent intensity is a sum over layers of
each layer's own emission attenuated by ``exp(-τ_top/μ)`` above it, which is
what the contribution function reports.  The flux is
``F_λ = 2π ∫₀¹ I(μ) μ dμ``, in W m⁻² µm⁻¹ at the surface.

Vertical optical depths beyond τ = 40 are treated as opaque (transmission
e^{-40} = 4e-18 to the top): the solver stops at the first level below which
every wavelength is that deep.  This neglects emission weighted by < 4e-18,
which matters only if B_λ at depth exceeded B_λ near τ ~ 1 by more than ~1e17
(a Wien-side contrast that needs T to rise by a factor ~10 over the column).

All arrays are vectorised over (n_layers, n_w) per direction; ``n_w`` may
be a flattened (wavelength × g) axis for correlated-k.
"""
from __future__ import annotations

import numpy as np

from .constants import C_SI, H_SI, K_B_SI

# B_λ = C1 / λ⁵ / (exp(C2 / (λ T)) - 1) with λ in µm, result in W m⁻² µm⁻¹ sr⁻¹
_C1 = 2.0 * H_SI * C_SI ** 2 * 1.0e24       # W m² sr⁻¹ -> (µm)⁵ W m⁻² µm⁻¹ sr⁻¹ (1e30 µm⁵/m⁵ × 1e-6 m/µm)
_C2 = H_SI * C_SI / K_B_SI * 1.0e6          # µm K
_X_MAX = 700.0                              # keep expm1 finite; B is ~1e-300 of its peak there
_TAU_CAP = 40.0                             # e^-40 = 4e-18: deeper layers are invisible from the top
_EXP_ARG_MAX = 600.0                        # |exp argument| cap: no denormal results
_THIN = 1.0e-5                              # slant Δ below which the thin-layer series is used


def planck_lambda(wavelength_um: np.ndarray, temperature_K: np.ndarray) -> np.ndarray:
    """Planck function B_λ in W m⁻² µm⁻¹ sr⁻¹ on a (temperature × wavelength) grid.

    Parameters
    ----------
    wavelength_um : ndarray (n_w,)
    temperature_K : ndarray (n,) or float

    Returns
    -------
    ndarray (n, n_w) (or (n_w,) for a scalar temperature)
    """
    wl = np.asarray(wavelength_um, dtype=np.float64)
    t = np.asarray(temperature_K, dtype=np.float64)
    x = (_C2 / wl) / t[..., None]
    np.minimum(x, _X_MAX, out=x)      # overflow-safe: exp(700) is finite, B there is effectively 0
    return (_C1 / wl ** 5) / np.expm1(x)


class PlanckCache:
    """Precomputed wavelength factors of B_λ for a fixed grid (the hot path)."""

    def __init__(self, wavelength_um: np.ndarray):
        wl = np.asarray(wavelength_um, dtype=np.float64)
        self.c2_over_wl = _C2 / wl
        self.c1_over_wl5 = _C1 / wl ** 5

    def __call__(self, temperature_K: np.ndarray) -> np.ndarray:
        x = np.multiply.outer(1.0 / np.asarray(temperature_K, dtype=np.float64), self.c2_over_wl)
        np.minimum(x, _X_MAX, out=x)
        np.expm1(x, out=x)
        return np.divide(self.c1_over_wl5, x, out=x)


def gauss_legendre_mu(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss–Legendre nodes and weights mapped from [-1, 1] to μ ∈ [0, 1] (weights sum to 1)."""
    x, w = np.polynomial.legendre.leggauss(int(n))
    return 0.5 * (x + 1.0), 0.5 * w


def emission_flux(planck_levels: np.ndarray, dtau: np.ndarray, mu: np.ndarray, mu_weights: np.ndarray,
                  contribution: bool = False):
    """Emergent flux of a non-scattering atmosphere.

    Parameters
    ----------
    planck_levels : ndarray (n_levels, n_w)
        B_λ at the levels (top first), W m⁻² µm⁻¹ sr⁻¹.
    dtau : ndarray (n_levels - 1, n_w)
        Vertical optical depth of each layer.
    mu, mu_weights : ndarray (n_mu,)
        Quadrature on [0, 1] (see :func:`gauss_legendre_mu`).
    contribution : bool
        Also return the contribution of each layer and of the bottom boundary.

    Returns
    -------
    flux : ndarray (n_w,)
        F_λ = 2π ∫ I μ dμ, W m⁻² µm⁻¹.
    contrib : ndarray (n_levels, n_w), only if ``contribution``
        Row i < n_levels-1: flux emitted by the layer between levels i and
        i+1 that reaches the top; last row: the bottom boundary's share.
        Rows sum to ``flux``.

    Notes
    -----
    Summing the layer terms of the module docstring, the products of
    transmissions telescope (T_i e^{-Δ_i} = T_{i+1}, T_i = exp(-τ_i/μ) at
    level i) and the bottom boundary term cancels, leaving

        I(μ) = B_0 + Σ_i (B_{i+1} - B_i) T_i (1 - e^{-Δ_i}) / Δ_i ,

    with T_i (1 - e^{-Δ_i}) = T_i - T_{i+1}: one ``exp`` per (μ, level, λ) and
    no recursion (for Δ < 1e-5 the series T_i (1 - Δ/2) replaces the
    difference, which would lose precision).  ``contribution=True``
    evaluates the layer terms themselves.
    """
    if contribution:
        return _flux_by_layer(planck_levels, dtau, mu, mu_weights)
    n_layers, n_w = dtau.shape
    # vertical τ at the levels; beyond τ = 40 every transmission is < 4e-18 for μ <= 1, so capping
    # τ there changes nothing in double precision and keeps exp away from denormal results
    tau = np.empty((n_layers + 1, n_w))
    tau[0] = 0.0
    n_seen = n_layers
    for i in range(n_layers):                                   # faster than cumsum along axis 0
        np.add(tau[i], dtau[i], out=tau[i + 1])
        if i % 8 == 7 and tau[i + 1].min() >= _TAU_CAP:
            # every wavelength is opaque above this level: deeper layers add < 4e-18 of the flux
            n_seen = i + 1
            break
    tau = tau[:n_seen + 1]
    np.minimum(tau, _TAU_CAP, out=tau)
    # a floor keeps 0/0 away from empty layers (limit of (1 - e^{-Δ})/Δ is 1) with products normal
    dtau = np.maximum(dtau[:n_seen], 1e-250)
    # candidates for the thin-layer branch, found once (flat indices; usually a small set)
    dtau_flat = np.ascontiguousarray(dtau).ravel()
    cand = np.flatnonzero(dtau_flat < _THIN * float(np.max(mu)))
    d_cand = dtau_flat[cand]
    acc = np.zeros((n_seen, n_w))
    trans = np.empty((n_seen + 1, n_w))
    diff = np.empty((n_seen, n_w))
    for m, wm in zip(mu, mu_weights):
        np.multiply(tau, -1.0 / m, out=trans)
        if _TAU_CAP / m > _EXP_ARG_MAX:
            np.maximum(trans, -_EXP_ARG_MAX, out=trans)
        np.exp(trans, out=trans)                                # T_i = exp(-τ_i / μ)
        # T_i (1 - e^{-Δ})/Δ = (T_i - T_{i+1}) μ / dτ; 1/dτ is applied after the loop, μ in the weight
        np.subtract(trans[:-1], trans[1:], out=diff)
        if cand.size:
            # Δ < 1e-5: the difference loses precision (ε/Δ); T_i Δ (1 - Δ/2) is exact to Δ³/6 there
            sel = d_cand < _THIN * m
            idx = cand[sel]
            delta = d_cand[sel] / m
            diff.ravel()[idx] = trans[:-1].ravel()[idx] * delta * (1.0 - 0.5 * delta)
        diff *= 2.0 * np.pi * wm * m * m                        # 2π w μ (flux) × μ (from 1/Δ)
        acc += diff
    acc /= dtau                                                 # true dτ: only transmissions were capped
    d_planck = planck_levels[1:n_seen + 1] - planck_levels[:n_seen]
    # π B_0: the 2π Σ w μ of the constant term (Gauss-Legendre integrates μ exactly)
    return np.pi * planck_levels[0] + np.einsum("lw,lw->w", d_planck, acc)


def _flux_by_layer(planck_levels, dtau, mu, mu_weights):
    """Layer-by-layer form of the formal solution (for the contribution function)."""
    b_top, b_bot = planck_levels[:-1], planck_levels[1:]
    delta = dtau[None, :, :] / mu[:, None, None]                # slant optical depths (n_mu, n_layers, n_w)
    np.maximum(delta, 1e-300, out=delta)
    one_minus_e = -np.expm1(-delta)                             # 1 - e^{-Δ}, accurate for small Δ
    trans = 1.0 - one_minus_e
    # layer emission: B_top (1-e) + (B_bot - B_top) [(1-e)/Δ - e]
    own = (one_minus_e / delta - trans) * (b_bot - b_top)[None] + b_top[None] * one_minus_e
    tau_top = np.concatenate([np.zeros((1, dtau.shape[1])), np.cumsum(dtau, axis=0)], axis=0)
    above = np.exp(-tau_top[None, :, :] / mu[:, None, None])     # (n_mu, n_levels, n_w)
    weights = (2.0 * np.pi) * mu * mu_weights
    layers = np.einsum("m,mlw->lw", weights, own * above[:, :-1])
    boundary = np.einsum("m,mw->w", weights, above[:, -1]) * planck_levels[-1]
    contrib = np.concatenate([layers, boundary[None]], axis=0)
    return contrib.sum(axis=0), contrib
