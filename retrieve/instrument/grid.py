"""The model spectrum as a function of wavelength, and exact integrals of it.

Every instrument operator treats the model spectrum, given at the model
wavelengths λ_0 < … < λ_{n−1}, as the piecewise-linear function through
those points, held constant from λ_0 down to the first bin edge and from
λ_{n−1} up to the last bin edge (:func:`model_bin_edges`).  The grid
therefore covers ``[edges[0], edges[-1]]``.  On this representation channel
averages, Gaussian line-spread integrals and filter integrals are computed
exactly (closed forms or Simpson's rule on pieces where the integrand is a
polynomial of degree ≤ 3), so each operator reproduces linear spectra
exactly and maps a flat spectrum onto itself.
"""
from __future__ import annotations

import numpy as np
import scipy.sparse as sp


def model_bin_edges(wavelength_um) -> np.ndarray:
    """Bin edges around the model wavelengths.

    Interior edges are geometric midpoints √(λ_i λ_{i+1}); the two outer
    edges are placed so that the end points are the geometric centres of
    their bins (λ_0²/e_1 and λ_{n−1}²/e_{n−1}).

    Parameters
    ----------
    wavelength_um : ndarray (n_w,)
        Ascending, positive bin centres, n_w ≥ 2.

    Returns
    -------
    ndarray (n_w + 1,)
    """
    wl = np.asarray(wavelength_um, dtype=np.float64)
    if wl.ndim != 1 or wl.size < 2 or np.any(np.diff(wl) <= 0) or wl[0] <= 0:
        raise ValueError("model wavelengths must be a positive, strictly ascending array of at least 2 points")
    inner = np.sqrt(wl[1:] * wl[:-1])
    return np.concatenate([[wl[0] ** 2 / inner[0]], inner, [wl[-1] ** 2 / inner[-1]]])


class PiecewiseLinearGrid:
    """Knots of the model-spectrum representation and the knot → model-point map.

    Parameters
    ----------
    wavelength_um : ndarray (n_w,)

    Attributes
    ----------
    knots : ndarray (n_w + 2,)
        ``[edge_0, λ_0, …, λ_{n−1}, edge_n]``.
    point : ndarray of int (n_w + 2,)
        Model index whose value each knot carries (ends repeat the end points).
    coverage : tuple of float
        (edge_0, edge_n) in µm.
    """

    def __init__(self, wavelength_um):
        self.wavelength_um = np.asarray(wavelength_um, dtype=np.float64)
        edges = model_bin_edges(self.wavelength_um)
        self.n_w = self.wavelength_um.size
        self.knots = np.concatenate([[edges[0]], self.wavelength_um, [edges[-1]]])
        self.point = np.concatenate([[0], np.arange(self.n_w), [self.n_w - 1]])
        self.coverage = (float(edges[0]), float(edges[-1]))

    def segment_of(self, wavelength_um) -> np.ndarray:
        """Index k of the knot interval [knots[k], knots[k+1]] holding each wavelength (clipped)."""
        k = np.searchsorted(self.knots, wavelength_um, side="right") - 1
        return np.clip(k, 0, self.knots.size - 2)

    def interpolation_weights(self, wavelength_um) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Model indices and weights (i0, w0, i1, w1) so that f(λ) = w0 f[i0] + w1 f[i1]."""
        x = np.asarray(wavelength_um, dtype=np.float64)
        k = self.segment_of(x)
        lo, hi = self.knots[k], self.knots[k + 1]
        w1 = np.clip((x - lo) / (hi - lo), 0.0, 1.0)
        return self.point[k], 1.0 - w1, self.point[k + 1], w1

    def segment_pairs(self, lower_um, upper_um) -> tuple[np.ndarray, np.ndarray]:
        """All (row, segment) pairs where segment k overlaps [lower[row], upper[row]].

        Returns
        -------
        rows, segments : ndarray of int, same length
        """
        first = self.segment_of(np.asarray(lower_um, dtype=np.float64))
        last = self.segment_of(np.asarray(upper_um, dtype=np.float64))
        counts = last - first + 1
        rows = np.repeat(np.arange(first.size), counts)
        offsets = np.arange(rows.size) - np.repeat(np.cumsum(counts) - counts, counts)
        return rows, first[rows] + offsets

    def to_matrix(self, rows, knot_index, weights, n_rows, normalise=True) -> sp.csr_matrix:
        """Assemble knot weights into a (n_rows, n_w) CSR matrix; optionally rows summing to 1."""
        return self.assemble(rows, self.point[knot_index], weights, n_rows, normalise)

    def assemble(self, rows, model_index, weights, n_rows, normalise=True) -> sp.csr_matrix:
        """Sum (row, model index, weight) triplets into a CSR matrix; optionally rows summing to 1."""
        matrix = sp.coo_matrix((weights, (rows, model_index)), shape=(n_rows, self.n_w)).tocsr()
        matrix.sum_duplicates()
        if normalise:
            totals = np.asarray(matrix.sum(axis=1)).ravel()
            matrix = sp.diags(1.0 / totals) @ matrix
        matrix = sp.csr_matrix(matrix)
        matrix.eliminate_zeros()
        return matrix


def box_average_operator(grid: PiecewiseLinearGrid, lower_um, upper_um) -> sp.csr_matrix:
    """Mean of the model spectrum over each interval [lower, upper].

    Exact for the piecewise-linear representation: on the part [u, v] of a
    segment inside the interval the integral is (v − u) f((u + v)/2).

    Parameters
    ----------
    grid : PiecewiseLinearGrid
    lower_um, upper_um : ndarray (n_rows,)
        Interval bounds inside ``grid.coverage``.

    Returns
    -------
    scipy.sparse.csr_matrix (n_rows, n_w)
        Rows sum to 1.
    """
    lower = np.asarray(lower_um, dtype=np.float64)
    upper = np.asarray(upper_um, dtype=np.float64)
    rows, seg = grid.segment_pairs(lower, upper)
    x0, x1 = grid.knots[seg], grid.knots[seg + 1]
    u = np.maximum(lower[rows], x0)
    v = np.minimum(upper[rows], x1)
    length = np.clip(v - u, 0.0, None)
    mid = 0.5 * (u + v)
    h = x1 - x0
    w_left = length * (x1 - mid) / h
    w_right = length * (mid - x0) / h
    return grid.to_matrix(np.concatenate([rows, rows]), np.concatenate([seg, seg + 1]),
                          np.concatenate([w_left, w_right]), lower.size)
