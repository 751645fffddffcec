"""Abundance posteriors: one panel per molecule.

A constrained abundance is drawn as its marginal histogram with the median
and the 16–84 per cent interval; an upper limit is drawn as the histogram
with a bar at the 95 per cent limit and an arrow pointing to lower values,
so the reader never mistakes the prior edge for a measurement.
"""
from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np
from matplotlib.figure import Figure

from ..errors import UserError
from . import style

UPPER_LIMIT_QUANTILE = 0.95
#: A constrained panel spans the median ± this many half-widths of the 16–84 % interval ...
ZOOM_HALF_WIDTHS = 6.0
#: ... but at least ± this many dex.
MIN_HALF_WIDTH_DEX = 0.25


def _column(samples, name: str) -> np.ndarray:
    try:
        return np.asarray(samples[name], dtype=float)
    except (KeyError, ValueError) as exc:
        raise UserError(f"abundance figure: posterior samples have no column {name!r}") from exc


def plot_abundances(samples, molecules: Sequence[str], upper_limits: Mapping[str, bool] | None = None,
                    prior_ranges: Mapping[str, tuple[float, float]] | None = None,
                    truths: Mapping[str, float] | None = None, bins: int = 30) -> Figure:
    """One panel per molecule with the posterior of ``log_vmr_<molecule>``.

    Parameters
    ----------
    samples : astropy.table.Table or mapping name → ndarray
        Posterior samples with columns ``log_vmr_<molecule>``.
    molecules : sequence of str
    upper_limits : mapping molecule → bool, optional
        True where the abundance is only bounded from above (e.g. from the
        identification step's abundance class); such panels show the 95 % limit.
    prior_ranges : mapping molecule → (low, high), optional
        Prior bounds, shaded lightly so the extent of the prior is visible.
    truths : mapping molecule → float, optional
        True log10 VMR of a simulated input.
    bins : int

    Returns
    -------
    matplotlib.figure.Figure
        One axes per molecule, in the given order; ``fig.upper_limit_values``
        maps each upper-limit molecule to the 95 % limit drawn.
    """
    molecules = list(molecules)
    if not molecules:
        raise UserError("abundance figure: no molecules to show")
    upper_limits = dict(upper_limits or {})
    prior_ranges = dict(prior_ranges or {})
    truths = dict(truths or {})
    ncols = min(3, len(molecules))
    nrows = math.ceil(len(molecules) / ncols)
    limits_drawn = {}
    with style.house_style():
        fig = style.new_figure(figsize=(2.6 * ncols + 0.4, 2.3 * nrows + 0.3))
        axes = np.atleast_1d(fig.subplots(nrows, ncols)).ravel()
        for ax in axes[len(molecules):]:
            ax.remove()
        for i, (ax, mol) in enumerate(zip(axes, molecules)):
            x = _column(samples, f"log_vmr_{mol}")
            colour = style.molecule_colour(mol, i)
            if mol in prior_ranges:
                ax.axvspan(*prior_ranges[mol], color=style.SAND, lw=0, zorder=0)
            counts, _, _ = ax.hist(x, bins=bins, density=True, histtype="stepfilled", color=colour,
                                   alpha=0.45 if upper_limits.get(mol) else 0.7, lw=0)
            top = counts.max() if counts.size else 1.0
            if upper_limits.get(mol):
                limit = float(np.quantile(x, UPPER_LIMIT_QUANTILE))
                limits_drawn[mol] = limit
                span = (prior_ranges.get(mol, (x.min(), x.max()))[1] - prior_ranges.get(mol, (x.min(), x.max()))[0])
                ax.axvline(limit, color=style.INK, lw=1.4)
                ax.annotate("", xy=(limit - 0.22 * span, 0.75 * top), xytext=(limit, 0.75 * top),
                            arrowprops={"arrowstyle": "-|>", "color": style.INK, "lw": 1.4})
                ax.set_title(rf"{style.molecule_tex(mol)}: < {limit:.2f} (95%)")
            else:
                q16, q50, q84 = np.quantile(x, [0.16, 0.5, 0.84])
                ax.axvspan(q16, q84, color=colour, alpha=0.18, lw=0)
                ax.axvline(q50, color=style.INK, lw=1.2)
                ax.set_title(rf"{style.molecule_tex(mol)}: ${q50:.2f}^{{+{q84 - q50:.2f}}}_{{-{q50 - q16:.2f}}}$")
                # zoom on a measured abundance (it would be a spike on the prior's scale)
                half = max(ZOOM_HALF_WIDTHS * 0.5 * (q84 - q16), MIN_HALF_WIDTH_DEX)
                if mol in truths:
                    half = max(half, 1.2 * abs(float(truths[mol]) - q50))
                low, high = prior_ranges.get(mol, (-np.inf, np.inf))
                ax.set_xlim(max(q50 - half, low), min(q50 + half, high))
            if mol in truths:
                ax.axvline(float(truths[mol]), color=style.LAGOON, lw=1.2, ls="--")
            ax.set_xlabel(style.parameter_label(f"log_vmr_{mol}"))
            ax.set_yticks([])
            ax.minorticks_off()
        fig.upper_limit_values = limits_drawn
    return fig
