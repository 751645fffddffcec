"""Synthetic photometry through filter response curves.

The photon-counting mean flux density of a filter with response T(λ) is

    ⟨F_λ⟩ = ∫ F_λ(λ) T(λ) λ dλ / ∫ T(λ) λ dλ

(Bessell & Murphy 2012, PASP 124, 140, eq. A11; the λ weight counts
photons rather than energy).  Filter curves are speclite's tabulations
(:mod:`retrieve.observations.filters`), linear between their points; the
model spectrum is linear between model wavelengths (:mod:`.grid`).  On the
union of both sets of points the integrand F T λ is a cubic, so Simpson's
rule on each piece makes the integral exact.
"""
from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from ..observations.filters import load_filter
from .grid import PiecewiseLinearGrid


def filter_support_um(name: str) -> tuple[float, float]:
    """Wavelength range (µm) over which the linearly interpolated response is non-zero."""
    wavelength, response = load_filter(name)
    positive = np.nonzero(response > 0)[0]
    first = max(int(positive[0]) - 1, 0)
    last = min(int(positive[-1]) + 1, wavelength.size - 1)
    return float(wavelength[first]), float(wavelength[last])


def _filter_row(grid: PiecewiseLinearGrid, name: str) -> tuple[np.ndarray, np.ndarray]:
    """Model indices and weights of ∫ F T λ dλ for one filter (Simpson on the union grid)."""
    wavelength, response = load_filter(name)
    lo, hi = filter_support_um(name)
    inside = (grid.knots > lo) & (grid.knots < hi)
    points = np.unique(np.concatenate([wavelength[(wavelength >= lo) & (wavelength <= hi)], grid.knots[inside]]))
    h = np.diff(points)
    mids = 0.5 * (points[:-1] + points[1:])
    nodes = np.concatenate([points[:-1], mids, points[1:]])
    simpson = np.concatenate([h / 6.0, 4.0 * h / 6.0, h / 6.0])
    weight = simpson * np.interp(nodes, wavelength, response, left=0.0, right=0.0) * nodes
    i0, w0, i1, w1 = grid.interpolation_weights(nodes)
    return np.concatenate([i0, i1]), np.concatenate([weight * w0, weight * w1])


def photometry_matrix(filters, model_wavelength_um) -> sp.csr_matrix:
    """Photon-weighted filter means as a (n_filters, n_w) CSR matrix with rows summing to 1.

    Parameters
    ----------
    filters : sequence of str
        speclite filter names.
    model_wavelength_um : ndarray (n_w,)
    """
    grid = PiecewiseLinearGrid(model_wavelength_um)
    rows, cols, weights = [], [], []
    for row, name in enumerate(filters):
        c, w = _filter_row(grid, name)
        rows.append(np.full(c.size, row))
        cols.append(c)
        weights.append(w)
    return grid.assemble(np.concatenate(rows), np.concatenate(cols), np.concatenate(weights), len(filters))
