"""Temperature–pressure profile with its posterior envelope, and the emission
contribution function beside it (sharing the pressure axis).
"""
from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from ..errors import UserError
from . import style
from .spectrum_plot import ONE_SIGMA, TWO_SIGMA

#: Wavelength ranges (µm) for the contribution-function curves (near-infrared
#: photometric bands, approximate limits; common practice, no source).
CONTRIBUTION_BANDS = {"Y": (0.95, 1.10), "J": (1.10, 1.40), "H": (1.40, 1.85), "K": (1.90, 2.45),
                      "L": (3.0, 4.1)}


def _contribution_curves(contribution, wavelength_um):
    """Normalised contribution curves: one per band covered, plus the total."""
    c = np.asarray(contribution, dtype=float)
    if c.ndim == 1:
        return {"all": c / c.max() if c.max() > 0 else c}
    if wavelength_um is None or len(wavelength_um) != c.shape[1]:
        raise UserError("profile figure: a 2-D contribution function needs its wavelength axis")
    w = np.asarray(wavelength_um, dtype=float)
    curves = {}
    for name, (lo, hi) in CONTRIBUTION_BANDS.items():
        sel = (w >= lo) & (w < hi)
        if sel.sum() >= 1:
            curves[name] = c[:, sel].mean(axis=1)
    curves["all"] = c.mean(axis=1)
    return {k: v / v.max() if v.max() > 0 else v for k, v in curves.items()}


def plot_profile(pressure_bar, temperature_K, contribution=None, contribution_wavelength_um=None,
                 truth_temperature_K=None, title: str | None = None) -> Figure:
    """T–P profile (median, 1σ and 2σ envelopes) and contribution function.

    Parameters
    ----------
    pressure_bar : ndarray (n_layers,)
        Ascending pressures (top of atmosphere first).
    temperature_K : ndarray (n_layers,) or (n_draws, n_layers)
        One profile, or posterior draws (then the median and envelopes are drawn).
    contribution : ndarray (n, ) or (n, n_wavelengths), optional
        Emission contribution function (any normalisation; each curve is
        scaled to a peak of one), per level (n = n_levels) or per layer
        (n = n_levels − 1, drawn at the layers' geometric-mean pressures).
    contribution_wavelength_um : ndarray (n_wavelengths,), optional
        Needed for a 2-D contribution function; curves are averaged per band.
    truth_temperature_K : ndarray (n_layers,), optional
        The profile a simulated spectrum was made with.
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
        Axes 0 is the profile, axes 1 (if any) the contribution function.
    """
    p = np.asarray(pressure_bar, dtype=float)
    t = np.atleast_2d(np.asarray(temperature_K, dtype=float))
    if t.shape[1] != p.size:
        raise UserError(f"profile figure: temperature has {t.shape[1]} layers but pressure has {p.size}")
    with style.house_style():
        fig = style.new_figure(figsize=(6.0, 4.6))
        if contribution is not None:
            ax, axc = fig.subplots(1, 2, sharey=True, gridspec_kw={"width_ratios": [2.4, 1.0]})
        else:
            ax, axc = fig.subplots(1, 1), None
        if t.shape[0] > 1:
            q = np.quantile(t, [(1 - TWO_SIGMA) / 2, (1 - ONE_SIGMA) / 2, 0.5,
                                (1 + ONE_SIGMA) / 2, (1 + TWO_SIGMA) / 2], axis=0)
            ax.fill_betweenx(p, q[0], q[4], color=style.OCHRE, alpha=0.25, lw=0, label=r"2$\sigma$")
            ax.fill_betweenx(p, q[1], q[3], color=style.OCHRE, alpha=0.55, lw=0, label=r"1$\sigma$")
            ax.plot(q[2], p, color=style.RUST, lw=1.5, label="median")
        else:
            ax.plot(t[0], p, color=style.RUST, lw=1.5, label="profile")
        if truth_temperature_K is not None:
            ax.plot(np.asarray(truth_temperature_K, dtype=float), p, color=style.LAGOON, lw=1.2, ls="--",
                    label="truth")
        ax.set_yscale("log")
        ax.set_ylim(p.max(), p.min())  # pressure increases downwards
        ax.set_xlabel("temperature [K]")
        ax.set_ylabel("pressure [bar]")
        ax.legend(loc="lower left")
        if axc is not None:
            curves = _contribution_curves(contribution, contribution_wavelength_um)
            pc = p if next(iter(curves.values())).size == p.size else np.sqrt(p[:-1] * p[1:])
            for i, (name, curve) in enumerate(curves.items()):
                colour = style.INK if name == "all" else style.CYCLE[(i + 1) % len(style.CYCLE)]
                axc.plot(curve, pc, color=colour, lw=1.6 if name == "all" else 1.0,
                         ls="-" if name == "all" else "--", label=name)
            axc.set_xlabel("contribution\n(normalised)")
            axc.set_xlim(0, 1.05)
            axc.legend(loc="lower right", title="band")
        if title:
            fig.suptitle(title)
    return fig
