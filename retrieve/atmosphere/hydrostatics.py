"""Hydrostatic equilibrium: column mass and optical depth, dτ = κ dP / g.

Units (cgs inside this module):

* pressure enters in bar and is converted with ``BAR_TO_DYN_CM2`` (1 bar = 1e6 dyn cm⁻²);
* gravity ``g`` is in cm s⁻² (``log_g`` is log10 of it);
* column mass above a level ``m = P / g`` is then in g cm⁻²;
* mass opacity κ is in cm² g⁻¹, so κ m is dimensionless.
"""
from __future__ import annotations

import numpy as np

from ..constants import BAR_TO_DYN_CM2


def gravity_cgs(log_g: float) -> float:
    """Surface gravity in cm s⁻² from log10 g (cgs)."""
    return float(10.0 ** log_g)


def column_mass(pressure_bar: np.ndarray, gravity: float) -> np.ndarray:
    """Mass per unit area above each level, g cm⁻² (``m = P / g``, constant g)."""
    return np.asarray(pressure_bar, dtype=np.float64) * (BAR_TO_DYN_CM2 / gravity)


def layer_optical_depth(kappa: np.ndarray, pressure_bar: np.ndarray, gravity: float,
                        out: np.ndarray | None = None) -> np.ndarray:
    """Optical depth of each layer between consecutive levels.

    Trapezoid rule in P of ``dτ = κ dP / g`` (κ is known at the levels).

    Parameters
    ----------
    kappa : ndarray (n_levels, ...)
        Mass opacity at the levels, cm² g⁻¹; trailing axes (wavelength, g) are kept.
    pressure_bar : ndarray (n_levels,)
    gravity : float
        cm s⁻².
    out : ndarray (n_levels - 1, ...), optional
        Preallocated result.

    Returns
    -------
    ndarray (n_levels - 1, ...)
    """
    dm = np.diff(column_mass(pressure_bar, gravity)) * 0.5
    dm = dm.reshape((-1,) + (1,) * (kappa.ndim - 1))
    out = np.add(kappa[:-1], kappa[1:], out=out)
    out *= dm
    return out
