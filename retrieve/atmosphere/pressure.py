"""Pressure levels of the model atmosphere.

Levels are log-spaced and ascending (top first).  The default, 80 levels from
1e-5 to 100 bar, puts roughly 11 levels per decade: the photosphere of a
warm companion in the near-infrared (~0.01–10 bar) gets ~35 levels, enough for
the linear-in-τ source function to be accurate to well below a percent, while
keeping one evaluation within a few milliseconds.
"""
from __future__ import annotations

import numpy as np

from ..errors import ConfigError

DEFAULT_PRESSURE_RANGE_BAR = (1.0e-5, 1.0e2)
DEFAULT_N_LEVELS = 80


def pressure_levels(p_top_bar: float = DEFAULT_PRESSURE_RANGE_BAR[0],
                    p_bottom_bar: float = DEFAULT_PRESSURE_RANGE_BAR[1],
                    n_levels: int = DEFAULT_N_LEVELS) -> np.ndarray:
    """Log-spaced pressure levels in bar, ascending.

    Parameters
    ----------
    p_top_bar, p_bottom_bar : float
        Pressure at the top and bottom level (bar), ``0 < p_top < p_bottom``.
    n_levels : int
        Number of levels (at least 3).

    Returns
    -------
    ndarray (n_levels,)
    """
    if not (np.isfinite(p_top_bar) and np.isfinite(p_bottom_bar) and 0.0 < p_top_bar < p_bottom_bar):
        raise ConfigError(f"pressure range [{p_top_bar}, {p_bottom_bar}] bar: need 0 < top < bottom")
    if int(n_levels) != n_levels or n_levels < 3:
        raise ConfigError(f"layers = {n_levels}: need an integer of at least 3")
    return np.logspace(np.log10(p_top_bar), np.log10(p_bottom_bar), int(n_levels))
