"""Cloud models: grey optical depth added to the gas opacity.

Grey deck (``cloud = "grey"``)
------------------------------
Parameters ``log_p_cloud_top`` (log10 of the deck-top pressure P_top in bar)
and ``cloud_tau_slope`` (α > 0).  The *cumulative* grey optical depth
measured from the top of the atmosphere is

    τ(P) = 0                        for P ≤ P_top,
    τ(P) = (P / P_top)^α − 1        for P > P_top,

so the deck has no optical depth above its top, τ grows as a power law of
pressure below it and reaches 1 at P = 2^{1/α} P_top.  A large α makes a
sharp, opaque deck; a small α a gradual, extended haze-like deck.  The
layer optical depth is the difference of τ between adjacent levels.

``cloud = "none"`` adds nothing.
"""
from __future__ import annotations

import dataclasses
from collections.abc import Callable

import numpy as np


def grey_cloud_optical_depth(pressure_bar, log_p_cloud_top, cloud_tau_slope) -> np.ndarray:
    """Cumulative grey cloud optical depth at each pressure level.

    Parameters
    ----------
    pressure_bar : ndarray (n_levels,)
    log_p_cloud_top : float
        log10 of the cloud-top pressure in bar.
    cloud_tau_slope : float
        Power-law index α (> 0) of τ(P) = (P/P_top)^α − 1 below the top.

    Returns
    -------
    ndarray (n_levels,)
        τ, zero at and above the cloud top.
    """
    pressure = np.asarray(pressure_bar, dtype=np.float64)
    ratio = pressure / 10.0 ** log_p_cloud_top
    return np.where(ratio > 1.0, np.power(np.maximum(ratio, 1.0), cloud_tau_slope) - 1.0, 0.0)


def no_cloud_optical_depth(pressure_bar) -> np.ndarray:
    """Zero optical depth at every level (``cloud = "none"``)."""
    return np.zeros_like(np.asarray(pressure_bar, dtype=np.float64))


@dataclasses.dataclass(frozen=True)
class CloudModel:
    """A cloud model: its parameter names and τ(P, **parameters)."""

    parameters: tuple[str, ...]
    optical_depth: Callable[..., np.ndarray]
    description: str


CLOUD_MODELS = {
    "none": CloudModel((), no_cloud_optical_depth, "no cloud"),
    "grey": CloudModel(("log_p_cloud_top", "cloud_tau_slope"), grey_cloud_optical_depth,
                       "grey deck, tau = (P/P_top)^alpha - 1 below P_top"),
}
