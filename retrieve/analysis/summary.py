"""Posterior summaries: median, central 68 % and 95 % intervals and the maximum a posteriori.

One row per quantity (free parameters first, then derived quantities), with
columns ``name``, ``median``, ``p2_5``, ``p16``, ``p84``, ``p97_5`` (sample
percentiles, linear interpolation as in :func:`numpy.percentile`), ``mean``,
``std``, ``map`` (value at the highest-posterior sample of the chain) and
``method`` (how a derived quantity was computed; empty for parameters).
"""
from __future__ import annotations

import json
import math
from collections.abc import Mapping

import numpy as np
from astropy.table import Table

PERCENTILES = (2.5, 16.0, 50.0, 84.0, 97.5)
COLUMNS = ("name", "median", "p2_5", "p16", "p84", "p97_5", "mean", "std", "map", "n_samples", "method")


def summarize(samples: Mapping[str, np.ndarray], map_values: Mapping[str, float] | None = None,
              methods: Mapping[str, str] | None = None) -> Table:
    """Summary table of posterior samples.

    Parameters
    ----------
    samples : mapping of str to ndarray
        Posterior draws per quantity (non-finite draws are ignored).
    map_values : mapping of str to float, optional
        Value of each quantity at the maximum a posteriori sample (NaN if absent).
    methods : mapping of str to str, optional
        Method statement per derived quantity.

    Returns
    -------
    astropy.table.Table
    """
    map_values = map_values or {}
    methods = methods or {}
    rows = []
    for name, values in samples.items():
        x = np.asarray(values, dtype=float).ravel()
        x = x[np.isfinite(x)]
        if x.size:
            p = np.percentile(x, PERCENTILES)
            mean, std = float(np.mean(x)), float(np.std(x, ddof=1)) if x.size > 1 else 0.0
        else:
            p, mean, std = [math.nan] * 5, math.nan, math.nan
        rows.append((name, p[2], p[0], p[1], p[3], p[4], mean, std,
                     float(map_values.get(name, math.nan)), int(x.size), methods.get(name, "")))
    table = Table(rows=rows, names=COLUMNS) if rows else Table(names=COLUMNS,
                                                                dtype=[str] + [float] * 8 + [int, str])
    table.meta["percentiles"] = list(PERCENTILES)
    return table


def summary_to_dict(table: Table) -> dict:
    """``{name: {median, p2_5, p16, p84, p97_5, mean, std, map, n_samples, method}}`` (JSON-ready; NaN → None)."""
    out = {}
    for row in table:
        entry = {}
        for col in COLUMNS[1:]:
            v = row[col]
            if isinstance(v, (np.floating, float)):
                v = float(v)
                v = v if math.isfinite(v) else None
            elif isinstance(v, (np.integer, int)):
                v = int(v)
            else:
                v = str(v)
            entry[col] = v
        out[str(row["name"])] = entry
    return out


def summary_json(table: Table, **extra) -> str:
    """JSON text of :func:`summary_to_dict` plus ``extra`` top-level keys."""
    return json.dumps({"quantities": summary_to_dict(table), **extra}, indent=2, allow_nan=False)
