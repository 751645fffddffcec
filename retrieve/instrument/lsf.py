"""Gaussian line-spread function as a sparse operator on the model grid."""
from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.special import erf

from .grid import PiecewiseLinearGrid

FWHM_TO_SIGMA = 1.0 / (2.0 * np.sqrt(2.0 * np.log(2.0)))
LSF_HALF_WIDTH_SIGMA = 5.0   # kernel truncation; the neglected tails hold 5.7e-7 of the area


def lsf_sigma_um(wavelength_um, resolving_power) -> np.ndarray:
    """Gaussian σ in µm for FWHM = λ / R."""
    return np.asarray(wavelength_um, dtype=np.float64) / np.asarray(resolving_power, dtype=np.float64) * FWHM_TO_SIGMA


def resolving_power_at(model_wavelength_um, resolving_power, resolving_power_wavelength_um=None) -> np.ndarray:
    """Resolving power at each model wavelength.

    A scalar applies everywhere; an array the length of the model grid is used
    as is; otherwise it is tabulated at ``resolving_power_wavelength_um`` (e.g.
    a dataset's channel centres) and interpolated linearly, held constant
    beyond the ends.
    """
    wl = np.asarray(model_wavelength_um, dtype=np.float64)
    r = np.asarray(resolving_power, dtype=np.float64)
    if r.ndim == 0:
        return np.full(wl.size, float(r))
    if resolving_power_wavelength_um is None:
        if r.size != wl.size:
            raise ValueError("resolving_power array needs resolving_power_wavelength_um unless it matches the model grid")
        return r.copy()
    return np.interp(wl, np.asarray(resolving_power_wavelength_um, dtype=np.float64), r)


def _gaussian_segment_weights(mu, sigma, u, v, x0, x1):
    """∫_u^v G(λ; μ, σ) φ(λ) dλ for the two linear hat pieces of segment [x0, x1].

    Returns the weights of the left and right knot (closed form with erf and
    the Gaussian itself; ∫(λ−μ)G dλ = σ²[G(u) − G(v)]).
    """
    s2 = np.sqrt(2.0) * sigma
    zu, zv = (u - mu) / s2, (v - mu) / s2
    i0 = 0.5 * (erf(zv) - erf(zu))
    i1 = sigma / np.sqrt(2.0 * np.pi) * (np.exp(-zu * zu) - np.exp(-zv * zv))
    h = x1 - x0
    return ((x1 - mu) * i0 - i1) / h, ((mu - x0) * i0 + i1) / h


def gaussian_lsf_operator(model_wavelength_um, resolving_power, resolving_power_wavelength_um=None,
                          output_index=None) -> sp.csr_matrix:
    """Convolution with a Gaussian LSF of FWHM λ/R, sampled back on the model grid.

    Row j gives the convolved spectrum at model wavelength λ_j: the integral
    of the (piecewise-linear) model spectrum against a Gaussian centred on
    λ_j with σ_j = λ_j / (R_j 2√(2 ln 2)), truncated at ±5σ and at the grid's
    coverage, and renormalised so that every row sums to 1 (a flat spectrum
    maps to itself exactly).

    Parameters
    ----------
    model_wavelength_um : ndarray (n_w,)
    resolving_power : float or ndarray
        See :func:`resolving_power_at`.
    resolving_power_wavelength_um : ndarray, optional
        Wavelengths at which an array ``resolving_power`` is tabulated.
    output_index : ndarray of int, optional
        Compute only these rows (model points actually used downstream); the
        other rows are empty.  Default: all.

    Returns
    -------
    scipy.sparse.csr_matrix (n_w, n_w)
    """
    grid = PiecewiseLinearGrid(model_wavelength_um)
    out = np.arange(grid.n_w) if output_index is None else np.asarray(output_index, dtype=int)
    r = resolving_power_at(grid.wavelength_um, resolving_power, resolving_power_wavelength_um)[out]
    mu = grid.wavelength_um[out]
    if np.any(~np.isfinite(r)) or np.any(r <= 0):
        raise ValueError("resolving power must be positive and finite")
    sigma = lsf_sigma_um(mu, r)
    lo = np.maximum(mu - LSF_HALF_WIDTH_SIGMA * sigma, grid.coverage[0])
    hi = np.minimum(mu + LSF_HALF_WIDTH_SIGMA * sigma, grid.coverage[1])
    rows, seg = grid.segment_pairs(lo, hi)
    x0, x1 = grid.knots[seg], grid.knots[seg + 1]
    u = np.clip(lo[rows], x0, x1)
    v = np.clip(hi[rows], x0, x1)
    w_left, w_right = _gaussian_segment_weights(mu[rows], sigma[rows], u, v, x0, x1)
    matrix = grid.to_matrix(np.concatenate([rows, rows]), np.concatenate([seg, seg + 1]),
                            np.concatenate([w_left, w_right]), mu.size)
    if output_index is None:
        return matrix
    placed = sp.coo_matrix(matrix)
    return sp.csr_matrix((placed.data, (out[placed.row], placed.col)), shape=(grid.n_w, grid.n_w))
