"""One sparse linear operator per dataset: model grid → dataset points.

Built once at set-up; in the hot path the model on a dataset's points is a
single sparse matrix–vector product ``operator @ flux``.

* spectra: Gaussian LSF at the dataset's resolving power (if given), then
  the mean over each channel's edges (``channel_edges_um``, or midpoints
  between channel centres);
* photometry: photon-weighted mean flux density through each filter.

Every row sums to 1, so a flat spectrum maps onto itself exactly.
"""
from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from ..errors import ConfigError, InputFileError
from .grid import PiecewiseLinearGrid, box_average_operator
from .lsf import LSF_HALF_WIDTH_SIGMA, gaussian_lsf_operator, lsf_sigma_um
from .photometry import filter_support_um, photometry_matrix


def _where(dataset) -> str:
    return f"dataset {dataset.name!r}" + (f" ({dataset.source})" if dataset.source is not None else "")


def channel_edges(dataset) -> np.ndarray:
    """(n, 2) lower/upper channel edges in µm.

    ``dataset.channel_edges_um`` if given; otherwise midpoints between
    adjacent channel centres, the outer edges half a neighbouring spacing
    beyond the end centres.
    """
    if dataset.channel_edges_um is not None:
        edges = np.asarray(dataset.channel_edges_um, dtype=np.float64)
        if edges.shape != (dataset.n_points, 2) or np.any(edges[:, 1] <= edges[:, 0]):
            raise InputFileError(f"{_where(dataset)}: channel_edges_um must be (n_points, 2) with lower < upper")
        return edges
    centres = np.asarray(dataset.wavelength_um, dtype=np.float64)
    if centres.size < 2:
        raise InputFileError(f"{_where(dataset)}: a single-channel spectrum needs channel edges; add them to the file")
    if np.any(np.diff(centres) <= 0):
        raise InputFileError(f"{_where(dataset)}: channel wavelengths must be strictly ascending")
    mids = 0.5 * (centres[1:] + centres[:-1])
    outer = np.concatenate([[centres[0] - (mids[0] - centres[0])], mids, [centres[-1] + (centres[-1] - mids[-1])]])
    return np.column_stack([outer[:-1], outer[1:]])


def _resolving_power_ends(dataset) -> tuple[float, float] | None:
    r = dataset.resolving_power
    if r is None:
        return None
    r = np.atleast_1d(np.asarray(r, dtype=np.float64))
    if np.any(~np.isfinite(r)) or np.any(r <= 0) or r.size not in (1, dataset.n_points):
        raise InputFileError(f"{_where(dataset)}: resolving_power must be positive, one value or one per channel")
    return float(r[0]), float(r[-1])


def required_wavelength_range(dataset) -> tuple[float, float]:
    """Model wavelength range (µm) a dataset's operator needs.

    Spectra: the channel edges widened by the LSF truncation half-width
    (5σ at the end channels' resolving power); photometry: the union of the
    filters' non-zero response ranges.
    """
    if dataset.kind == "photometry":
        supports = [filter_support_um(name) for name in _filters(dataset)]
        return min(s[0] for s in supports), max(s[1] for s in supports)
    if dataset.kind != "spectrum":
        raise InputFileError(f"{_where(dataset)}: unknown dataset kind {dataset.kind!r}; expected 'spectrum' or 'photometry'")
    edges = channel_edges(dataset)
    lo, hi = float(edges[0, 0]), float(edges[-1, 1])
    ends = _resolving_power_ends(dataset)
    if ends is not None:
        lo -= LSF_HALF_WIDTH_SIGMA * float(lsf_sigma_um(lo, ends[0]))
        hi += LSF_HALF_WIDTH_SIGMA * float(lsf_sigma_um(hi, ends[1]))
    return lo, hi


def _check_coverage(dataset, model_wavelength_um) -> None:
    lo, hi = required_wavelength_range(dataset)
    cover = PiecewiseLinearGrid(model_wavelength_um).coverage
    if lo < cover[0] or hi > cover[1]:
        raise ConfigError(
            f"{_where(dataset)} needs model wavelengths {lo:.4g}–{hi:.4g} µm but the model grid covers "
            f"{cover[0]:.4g}–{cover[1]:.4g} µm; use opacity tables / a model grid spanning the dataset")


def _filters(dataset) -> list[str]:
    if not dataset.filters or len(dataset.filters) != dataset.n_points:
        raise InputFileError(f"{_where(dataset)}: photometry needs one filter name per point (column 'filter')")
    return list(dataset.filters)


def spectrum_operator(dataset, model_wavelength_um) -> sp.csr_matrix:
    """LSF convolution then channel averaging for a spectrum.

    Parameters
    ----------
    dataset : Dataset
        ``kind == "spectrum"``; uses ``resolving_power`` (None: no LSF, only
        channel averaging) and ``channel_edges_um``.
    model_wavelength_um : ndarray (n_w,)

    Returns
    -------
    scipy.sparse.csr_matrix (n_points, n_w)
        Rows sum to 1.

    Raises
    ------
    ConfigError
        The model grid does not cover the dataset plus the LSF margin.
    """
    wl = np.asarray(model_wavelength_um, dtype=np.float64)
    _check_coverage(dataset, wl)
    edges = channel_edges(dataset)
    average = box_average_operator(PiecewiseLinearGrid(wl), edges[:, 0], edges[:, 1])
    if _resolving_power_ends(dataset) is None:
        return average
    r = np.atleast_1d(np.asarray(dataset.resolving_power, dtype=np.float64))
    at = None if r.size == 1 else dataset.wavelength_um
    used = np.unique(average.indices)           # model points the channel means read
    lsf = gaussian_lsf_operator(wl, r[0] if r.size == 1 else r, at, output_index=used)
    return sp.csr_matrix(average @ lsf)


def photometry_operator(dataset, model_wavelength_um) -> sp.csr_matrix:
    """Photon-weighted mean flux density through each filter (Bessell & Murphy 2012).

    Returns
    -------
    scipy.sparse.csr_matrix (n_filters, n_w)
        Rows sum to 1.
    """
    wl = np.asarray(model_wavelength_um, dtype=np.float64)
    _check_coverage(dataset, wl)
    return photometry_matrix(_filters(dataset), wl)


def dataset_operator(dataset, model_wavelength_um) -> sp.csr_matrix:
    """The operator for a dataset of either kind (see module docstring)."""
    if dataset.kind == "spectrum":
        return spectrum_operator(dataset, model_wavelength_um)
    if dataset.kind == "photometry":
        return photometry_operator(dataset, model_wavelength_um)
    raise InputFileError(f"{_where(dataset)}: unknown dataset kind {dataset.kind!r}; expected 'spectrum' or 'photometry'")
