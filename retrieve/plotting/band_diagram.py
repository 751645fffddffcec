"""Band-depth diagram: a water index against a methane index for many objects.

Each object is a point with error bars in both indices, labelled by name.
The index definitions belong to the identification step; this figure only
needs a table of values and uncertainties.
"""
from __future__ import annotations

import numpy as np
from astropy.table import Table
from matplotlib.figure import Figure

from ..errors import UserError
from . import style


def plot_band_diagram(table: Table, x: str = "h2o_index", y: str = "ch4_index", name: str = "name",
                      x_label: str = r"H$_2$O index", y_label: str = r"CH$_4$ index",
                      annotate: bool = True) -> Figure:
    """Scatter of two spectral indices with errors, one point per object.

    Parameters
    ----------
    table : astropy.table.Table
        Columns ``<x>``, ``<x>_err``, ``<y>``, ``<y>_err`` and ``<name>``
        (the error columns are optional).
    x, y, name : str
        Column names of the two indices and the object label.
    x_label, y_label : str
        Axis labels.
    annotate : bool
        Write each object's name beside its point.

    Returns
    -------
    matplotlib.figure.Figure
    """
    for col in (x, y):
        if col not in table.colnames:
            raise UserError(f"band diagram: table has no column {col!r}; available: {table.colnames}")
    if len(table) == 0:
        raise UserError("band diagram: the table has no rows")
    xv, yv = np.asarray(table[x], dtype=float), np.asarray(table[y], dtype=float)
    xe = np.asarray(table[f"{x}_err"], dtype=float) if f"{x}_err" in table.colnames else None
    ye = np.asarray(table[f"{y}_err"], dtype=float) if f"{y}_err" in table.colnames else None
    labels = [str(v) for v in table[name]] if name in table.colnames else [str(i) for i in range(len(table))]
    with style.house_style():
        fig = style.new_figure(figsize=(4.8, 4.2))
        ax = fig.subplots()
        ax.errorbar(xv, yv, xerr=xe, yerr=ye, fmt="o", ms=5, color=style.INK, mfc=style.OCHRE, mec=style.INK,
                    ecolor=style.INK, elinewidth=0.9, capsize=2, lw=0)
        if annotate:
            for xi, yi, label in zip(xv, yv, labels):
                ax.annotate(label, (xi, yi), xytext=(4, 4), textcoords="offset points", fontsize=7.5,
                            color=style.INK)
        ax.set_xlabel(x_label)
        ax.set_ylabel(y_label)
    return fig
