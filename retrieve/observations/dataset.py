"""In-memory observation containers, in the fixed internal units.

Every reader in :mod:`retrieve.observations` returns these; everything
downstream (instrument, likelihood, analysis) consumes only these.
"""
from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np


@dataclasses.dataclass
class Dataset:
    """One dataset of one object: an IFS spectrum or a set of photometric points.

    All arrays are plain floats in internal units: wavelength in µm, flux
    density and uncertainty in W m⁻² µm⁻¹, covariance in (W m⁻² µm⁻¹)².

    Parameters
    ----------
    name : str
        Short unique label within the object (e.g. ``"ifs"``, ``"phot"``); used
        for per-dataset parameters such as ``scale_<name>``.
    kind : {"spectrum", "photometry"}
    wavelength_um : ndarray (n,)
        Channel centres (spectrum) or filter effective wavelengths (photometry), ascending for spectra.
    flux, uncertainty : ndarray (n,)
    covariance : ndarray (n, n) or None
        Full covariance; if given, its diagonal supersedes ``uncertainty**2``.
    resolving_power : float or ndarray (n,) or None
        λ/Δλ (FWHM) of a Gaussian line-spread function.
    channel_edges_um : ndarray (n, 2) or None
        Lower/upper wavelength of each channel; if None the instrument derives
        edges from midpoints between channel centres.
    filters : list of str or None
        Photometry only: one filter name per point (speclite names, e.g. ``"twomass-Ks"``).
    source : Path or None
        The file it came from (for messages and the run manifest).
    meta : dict
        Header metadata (e.g. simulation truths).
    """

    name: str
    kind: str
    wavelength_um: np.ndarray
    flux: np.ndarray
    uncertainty: np.ndarray
    covariance: np.ndarray | None = None
    resolving_power: float | np.ndarray | None = None
    channel_edges_um: np.ndarray | None = None
    filters: list[str] | None = None
    source: Path | None = None
    meta: dict = dataclasses.field(default_factory=dict)

    @property
    def n_points(self) -> int:
        return int(self.wavelength_um.size)

    def variance(self) -> np.ndarray:
        """Diagonal variances (from the covariance if present)."""
        if self.covariance is not None:
            return np.diag(self.covariance).copy()
        return self.uncertainty ** 2


@dataclasses.dataclass
class ObjectData:
    """All datasets of one object."""

    name: str
    datasets: list[Dataset]

    def __post_init__(self):
        names = [d.name for d in self.datasets]
        if len(set(names)) != len(names):
            from ..errors import InputFileError
            raise InputFileError(f"object {self.name!r}: dataset names must be unique, got {names}")

    def __getitem__(self, name: str) -> Dataset:
        for d in self.datasets:
            if d.name == name:
                return d
        raise KeyError(name)

    @property
    def wavelength_range_um(self) -> tuple[float, float]:
        lo = min(float(np.min(d.channel_edges_um) if d.channel_edges_um is not None else d.wavelength_um.min())
                 for d in self.datasets)
        hi = max(float(np.max(d.channel_edges_um) if d.channel_edges_um is not None else d.wavelength_um.max())
                 for d in self.datasets)
        return lo, hi
