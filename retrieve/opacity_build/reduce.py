"""Reduction of fine-grid cross sections to the output bins: averages, samples, k-coefficients.

Correlated-k (Lacis & Oinas 1991, JGR 96, 9027; Goody et al. 1989, JQSRT 42,
539): within one bin the fine-grid values, sorted ascending, define k(g) with
g the cumulative fraction of the bin (sample i of n sits at g = (i + ½)/n);
the table stores k at the Gauss–Legendre nodes mapped to [0, 1], so that
Σ_j w_j f(k(g_j)) approximates the bin average of f(σ(ν)).
"""
from __future__ import annotations

import numpy as np


def bin_index_ranges(wavenumber_cm: np.ndarray, edges_um: np.ndarray) -> np.ndarray:
    """For each wavelength bin, the [start, stop) index range of fine points inside it.

    Parameters
    ----------
    wavenumber_cm : ndarray (m,), ascending (uniform fine grid)
    edges_um : ndarray (n_w + 1,), ascending

    Returns
    -------
    ndarray (n_w, 2) of int; bins ascend in wavelength (descend in wavenumber).
    """
    nu_edges = 1e4 / np.asarray(edges_um)[::-1]          # ascending wavenumber edges
    idx = np.searchsorted(wavenumber_cm, nu_edges, side="left")
    ranges = np.stack([idx[:-1], idx[1:]], axis=1)[::-1]  # back to ascending wavelength
    return np.ascontiguousarray(ranges)


def bin_mean(sigma: np.ndarray, ranges: np.ndarray) -> np.ndarray:
    """Mean of the fine-grid values in each bin (uniform grid: the wavenumber average)."""
    csum = np.concatenate([[0.0], np.cumsum(sigma, dtype=np.float64)])
    n = ranges[:, 1] - ranges[:, 0]
    if np.any(n == 0):
        raise ValueError("an output bin holds no fine-grid point; decrease fine_resolution")
    return (csum[ranges[:, 1]] - csum[ranges[:, 0]]) / n


def bin_sample(wavenumber_cm: np.ndarray, sigma: np.ndarray, centres_um: np.ndarray) -> np.ndarray:
    """Fine-grid values interpolated (linearly) at the bin centres."""
    return np.interp(1e4 / np.asarray(centres_um), wavenumber_cm, sigma)


def k_coefficients(sigma: np.ndarray, ranges: np.ndarray, g_points: np.ndarray) -> np.ndarray:
    """k(g) at ``g_points`` for every bin, from the sorted fine-grid values; shape (n_w, n_g)."""
    out = np.empty((ranges.shape[0], g_points.size))
    for b, (i0, i1) in enumerate(ranges):
        vals = np.sort(sigma[i0:i1])
        n = vals.size
        if n == 0:
            raise ValueError("an output bin holds no fine-grid point; decrease fine_resolution")
        g = (np.arange(n) + 0.5) / n
        out[b] = np.interp(g_points, g, vals)
    return out
