"""Molecular opacity from tables, in the hot path.

Set-up (once per model) does the expensive part: each table is cut to the
model's wavelength window, put on that wavelength grid, and interpolated onto
the model's pressure levels (linear in log10 P).  Pressures outside a table's
range are **clamped** to its first/last pressure: the nearest tabulated
pressure's opacity is used, no extrapolation (a mild approximation where the
model's top or bottom levels lie beyond the table, where pressure broadening
matters least or the layers are optically thick anyway).

Per evaluation only a linear-in-T interpolation of the (natural) log of the
cross section remains, vectorised over levels, species and wavelength (and g
for k-tables), followed by one ``exp``.  This step runs in float32: the
tables store float32 log10 values (relative precision ~3e-6 in σ), so float64
would add no accuracy but twice the memory traffic of the largest array of
an evaluation.  Values below ~1e-37 cm² (the table floor) become exactly 0.  Temperatures outside a table raise
:class:`~retrieve.errors.ModelEvaluationError` (``"T above table range"`` /
``"T below table range"``); nothing is extrapolated.
"""
from __future__ import annotations

import dataclasses
from collections.abc import Sequence

import numpy as np

from ..errors import ModelEvaluationError, OpacityTableError
from .table import OpacityTable, regrid_wavelength

LN10 = np.log(10.0)
_LN_FLOOR = -85.0    # exp(-85) ~ 1.2e-37: still a normal float32


def pressure_weights(table_pressure_bar: np.ndarray, pressure_bar: np.ndarray):
    """Indices and weights for linear interpolation in log10 P, clamped at the table's ends.

    Returns
    -------
    i : ndarray of int (n_levels,)
    w : ndarray (n_levels,)
        value = (1 - w) * table[i] + w * table[i + 1]
    """
    x = np.log10(table_pressure_bar)
    if x.size == 1:
        return np.zeros(pressure_bar.size, dtype=int), np.zeros(pressure_bar.size)
    xq = np.clip(np.log10(pressure_bar), x[0], x[-1])
    i = np.clip(np.searchsorted(x, xq, side="right") - 1, 0, x.size - 2)
    w = (xq - x[i]) / (x[i + 1] - x[i])
    return i, w


def _on_levels(table: OpacityTable, pressure_bar: np.ndarray) -> np.ndarray:
    """Table values (log10) on the model levels: (n_levels, n_T, n_w[, n_g]) float64."""
    data = np.asarray(table.log10_value, dtype=np.float64)
    i, w = pressure_weights(table.pressure_bar, pressure_bar)
    shape = (-1,) + (1,) * (data.ndim - 1)
    upper = data[np.minimum(i + 1, data.shape[0] - 1)]
    return (1.0 - w.reshape(shape)) * data[i] + w.reshape(shape) * upper


class _TemperatureGroup:
    """Tables sharing one temperature axis, stacked for one vectorised interpolation."""

    def __init__(self, temperature_K: np.ndarray, members: list[int], on_levels: list[np.ndarray], label: str):
        if temperature_K.size < 2:
            raise OpacityTableError(f"{label}: needs at least two temperatures to interpolate in T")
        self.t = temperature_K
        self.t_min, self.t_max = float(temperature_K[0]), float(temperature_K[-1])
        self.members = np.asarray(members)
        stack = np.stack(on_levels, axis=2) * LN10          # (n_l, n_T, n_s, n_w[, n_g]), natural log
        # floor: exp of anything lower underflows float32 to denormals (slow, and meaningless opacity)
        np.maximum(stack, _LN_FLOOR, out=stack)
        base = stack[:, :-1]
        slope = (stack[:, 1:] - stack[:, :-1]) / np.diff(temperature_K).reshape((1, -1) + (1,) * (stack.ndim - 2))
        self.n_levels, self.n_int = base.shape[0], base.shape[1]
        self.item_shape = base.shape[2:]
        # flattened so that one np.take with a per-level row index gathers contiguous slabs
        self.base = np.ascontiguousarray(base.reshape(self.n_levels * self.n_int, -1), dtype=np.float32)
        self.slope = np.ascontiguousarray(slope.reshape(self.n_levels * self.n_int, -1), dtype=np.float32)
        self._rows = np.arange(self.n_levels) * self.n_int

    def log_values(self, temperature_K: np.ndarray) -> np.ndarray:
        """ln σ at the levels, (n_levels, prod(item_shape)) (a new array)."""
        i = np.clip(np.searchsorted(self.t, temperature_K, side="right") - 1, 0, self.n_int - 1)
        dt = (temperature_K - self.t[i]).astype(np.float32)
        rows = self._rows + i
        # plain fancy indexing: faster than np.take(..., out=) for row gathers here
        a = self.base[rows]
        b = self.slope[rows]
        b *= dt[:, None]
        a += b
        return a


class MolecularOpacity:
    """Cross sections (cm² molecule⁻¹) of several absorbers on the model levels.

    Parameters
    ----------
    tables : sequence of OpacityTable
        All ``cross_section`` or all ``ktable``; order defines the species axis.
    pressure_bar : ndarray (n_levels,)
        Model levels.
    wavelength_um : ndarray (n_w,)
        Model wavelength grid.  Cross-section tables are regridded onto it at
        set-up when their grid differs; k-tables must contain exactly these bin
        centres.
    """

    def __init__(self, tables: Sequence[OpacityTable], pressure_bar: np.ndarray, wavelength_um: np.ndarray):
        if not tables:
            raise OpacityTableError("no molecular opacity tables given")
        kinds = {t.kind for t in tables}
        if len(kinds) != 1 or kinds.pop() not in ("cross_section", "ktable"):
            raise OpacityTableError(f"molecular tables must all be cross_section or all ktable, got "
                                    f"{[t.kind for t in tables]}")
        self.kind = tables[0].kind
        self.species = [t.species for t in tables]
        self.pressure_bar = np.asarray(pressure_bar, dtype=np.float64)
        self.wavelength_um = np.asarray(wavelength_um, dtype=np.float64)
        n_l, n_w = self.pressure_bar.size, self.wavelength_um.size
        self.n_g = tables[0].g_points.size if self.kind == "ktable" else 0
        self.g_weights = tables[0].g_weights if self.kind == "ktable" else None
        groups: dict[tuple, list[int]] = {}
        on_levels = []
        for s, table in enumerate(tables):
            table = self._on_model_grid(table)
            on_levels.append(_on_levels(table, self.pressure_bar))
            groups.setdefault(tuple(table.temperature_K), []).append(s)
        self._groups = [_TemperatureGroup(np.array(t), members, [on_levels[m] for m in members],
                                          tables[members[0]].label) for t, members in groups.items()]
        self.t_range = (max(g.t_min for g in self._groups), min(g.t_max for g in self._groups))
        shape = (n_l, len(tables), n_w) + ((self.n_g,) if self.n_g else ())
        self._out = np.empty(shape, dtype=np.float32)

    def _on_model_grid(self, table: OpacityTable) -> OpacityTable:
        wl = self.wavelength_um
        if self.kind == "ktable":
            if table.g_points.size != self.n_g or not np.allclose(table.g_weights, self.g_weights, rtol=1e-10):
                raise OpacityTableError(f"{table.label}: g points differ from the other k-tables")
            idx = np.searchsorted(table.wavelength_um, wl)
            idx = np.clip(idx, 0, table.wavelength_um.size - 1)
            if not np.allclose(table.wavelength_um[idx], wl, rtol=1e-9, atol=0.0):
                raise OpacityTableError(f"{table.label}: k-table bins differ from the model's; "
                                        "build all k-tables on the same bins")
            return dataclasses.replace(table, log10_value=table.log10_value[:, :, idx], wavelength_um=wl,
                                       wavelength_edges_um=table.wavelength_edges_um[np.r_[idx, idx[-1] + 1]])
        idx = np.searchsorted(table.wavelength_um, wl)
        idx = np.clip(idx, 0, table.wavelength_um.size - 1)
        if np.array_equal(table.wavelength_um[idx], wl):  # same grid: a cut, no resampling
            return dataclasses.replace(table, log10_value=table.log10_value[:, :, idx], wavelength_um=wl,
                                       wavelength_edges_um=None)
        return regrid_wavelength(table, wl)

    def cross_sections(self, temperature_K: np.ndarray) -> np.ndarray:
        """Cross sections at the levels' temperatures.

        Parameters
        ----------
        temperature_K : ndarray (n_levels,)

        Returns
        -------
        ndarray (n_levels, n_species, n_w) or (n_levels, n_species, n_w, n_g), float32
            cm² molecule⁻¹.  A buffer reused by the next call: copy it to keep it.

        Raises
        ------
        ModelEvaluationError
            ``"T below table range"`` / ``"T above table range"``.
        """
        t_lo, t_hi = float(temperature_K.min()), float(temperature_K.max())
        if t_lo < self.t_range[0]:
            raise ModelEvaluationError("T below table range", f"{t_lo:.1f} K < {self.t_range[0]:.1f} K")
        if t_hi > self.t_range[1]:
            raise ModelEvaluationError("T above table range", f"{t_hi:.1f} K > {self.t_range[1]:.1f} K")
        out = self._out
        n_l = out.shape[0]
        for group in self._groups:
            logs = group.log_values(temperature_K).reshape((n_l, group.members.size) + out.shape[2:])
            if len(self._groups) == 1:
                np.exp(logs, out=out)
            else:
                out[:, group.members] = np.exp(logs)
        return out

    def preinterpolated_arrays(self) -> list[np.ndarray]:
        """The arrays read per evaluation (for benchmarks: a plain copy of them is the I/O floor)."""
        return [a for g in self._groups for a in (g.base, g.slope)]
