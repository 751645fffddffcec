"""Corner plot of posterior samples (one- and two-dimensional marginals).

Drawn with the ``corner`` package (Foreman-Mackey 2016, JOSS 1, 24) in the
house style: labels with units, 16/50/84 per cent quantiles marked and
quoted above each diagonal panel, truth markers for simulated inputs.
"""
from __future__ import annotations

from collections.abc import Mapping, Sequence

import corner
import numpy as np
from astropy.table import Table
from matplotlib.figure import Figure

from ..errors import UserError
from . import style

QUANTILES = (0.16, 0.5, 0.84)


def _as_columns(samples, names: Sequence[str] | None) -> tuple[np.ndarray, list[str]]:
    """Return ``(array (n_samples, n_params), names)`` from a Table or an array."""
    if isinstance(samples, Table):
        names = list(names) if names is not None else list(samples.colnames)
        missing = [n for n in names if n not in samples.colnames]
        if missing:
            raise UserError(f"posterior samples have no column(s) {missing}; available: {samples.colnames}")
        data = np.column_stack([np.asarray(samples[n], dtype=float) for n in names])
        return data, names
    data = np.atleast_2d(np.asarray(samples, dtype=float))
    if names is None:
        names = [f"p{i}" for i in range(data.shape[1])]
    if data.shape[1] != len(names):
        raise UserError(f"samples have {data.shape[1]} columns but {len(names)} names were given")
    return data, list(names)


def format_interval(q16: float, q50: float, q84: float) -> str:
    """``median^{+upper}_{-lower}`` in mathtext, rounded to two significant figures of the error."""
    err = min(q84 - q50, q50 - q16)
    decimals = max(0, 1 - int(np.floor(np.log10(err)))) if err > 0 else 3
    return rf"${q50:.{decimals}f}^{{+{q84 - q50:.{decimals}f}}}_{{-{q50 - q16:.{decimals}f}}}$"


def plot_corner(samples, names: Sequence[str] | None = None, labels: Mapping[str, str] | None = None,
                truths: Mapping[str, float] | None = None, subset: Sequence[str] | None = None,
                derived: Mapping[str, np.ndarray] | None = None, bins: int = 24) -> Figure:
    """Corner plot of posterior samples.

    Parameters
    ----------
    samples : astropy.table.Table or ndarray (n_samples, n_params)
        Posterior samples; a Table's column names are the parameter names.
    names : sequence of str, optional
        Parameter names (required for an array; for a Table, the columns to use).
    labels : mapping, optional
        Axis label per name; defaults to :func:`style.parameter_label` (with units).
    truths : mapping, optional
        True values of a simulated input; names absent from it get no marker.
    subset : sequence of str, optional
        Only these parameters (in this order); may include names in ``derived``.
    derived : mapping name → ndarray (n_samples,), optional
        Extra columns computed from the samples (e.g. mass from log g and R).
    bins : int
        Histogram bins per axis.

    Returns
    -------
    matplotlib.figure.Figure
    """
    data, names = _as_columns(samples, names)
    if derived:
        for key, values in derived.items():
            values = np.asarray(values, dtype=float)
            if values.shape != (data.shape[0],):
                raise UserError(f"derived quantity {key!r} has shape {values.shape}, expected ({data.shape[0]},)")
            data = np.column_stack([data, values])
            names.append(key)
    if subset is not None:
        unknown = [s for s in subset if s not in names]
        if unknown:
            raise UserError(f"--subset: unknown parameter(s) {unknown}; choose from {names}")
        cols = [names.index(s) for s in subset]
        data, names = data[:, cols], list(subset)
    # corner refuses a column with zero range; such a column carries no information anyway
    keep = [i for i in range(data.shape[1]) if np.ptp(data[:, i]) > 0]
    data, names = data[:, keep], [names[i] for i in keep]
    if not names:
        raise UserError("corner plot: no parameter varies across the posterior samples")
    labels = dict(labels or {})
    axis_labels = [labels.get(n, style.parameter_label(n)) for n in names]
    truth_values = None
    if truths:
        truth_values = [float(truths[n]) if n in truths else None for n in names]
        if all(t is None for t in truth_values):
            truth_values = None
    size = max(4.0, 1.55 * len(names))
    with style.house_style():
        fig = Figure(figsize=(size, size))
        corner.corner(
            data, bins=bins, labels=axis_labels, quantiles=list(QUANTILES), show_titles=False,
            label_kwargs={"fontsize": 9}, truths=truth_values, truth_color=style.LAGOON,
            color=style.INK, fig=fig, plot_datapoints=False, fill_contours=True,
            levels=(1 - np.exp(-0.5), 1 - np.exp(-2.0)),  # 1σ and 2σ of a 2-D Gaussian
            hist_kwargs={"color": style.RUST, "lw": 1.1}, max_n_ticks=4,
        )
        diagonal = np.array(fig.axes).reshape(len(names), len(names)).diagonal()
        for ax, column in zip(diagonal, data.T):
            ax.set_title(format_interval(*np.quantile(column, QUANTILES)), fontsize=8)
        fig.parameter_names = list(names)  # lets callers and tests map axes back to parameters
    return fig
