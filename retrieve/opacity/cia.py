"""Collision-induced absorption (CIA) in the forward model.

A ``cia`` table holds the binary absorption coefficient ``k(T, λ)`` in
cm⁵ molecule⁻² (see :mod:`retrieve.opacity.table`).  For a pair (a, b) the
absorption coefficient per unit length is

    α = k(T) n_a n_b            [cm⁻¹],   n_x = vmr_x P / (k_B T),

and the mass opacity is κ = α / ρ with ρ = P μ m_u / (k_B T), so

    κ = k(T) vmr_a vmr_b n / (μ m_u),      n = P / (k_B T).

Interpolation is linear in T of log10 k.  Temperatures outside the table are
clamped to the nearest tabulated temperature: published CIA tables often
stop at a few thousand kelvin (or start above the coldest layers), and a
clamped, smooth continuum is a better approximation there than either zero
opacity or a refused model.  Use :attr:`CIAInterpolator.t_range` to report
the clamping to users.
"""
from __future__ import annotations

import numpy as np

from ..constants import AMU_CGS, BAR_TO_DYN_CM2, K_B_CGS
from ..errors import OpacityTableError
from .table import LOG10_FLOOR, OpacityTable, regrid_wavelength


class CIAInterpolator:
    """CIA mass opacity of one collision pair on the model wavelength grid.

    Parameters
    ----------
    table : OpacityTable
        A table of kind ``"cia"``.
    wavelength_um : ndarray (n_w,)
        Model wavelength grid (ascending, µm).  The table is regridded once
        here; wavelengths outside the table get exactly zero CIA opacity.

    Attributes
    ----------
    species : str
        The collision pair, e.g. ``"H2-He"``.
    wavelength_um : ndarray (n_w,)
    """

    def __init__(self, table: OpacityTable, wavelength_um):
        if table.kind != "cia":
            raise OpacityTableError(f"{table.label}: expected a 'cia' table, got kind {table.kind!r}")
        self.species = table.species
        self.wavelength_um = np.asarray(wavelength_um, dtype=np.float64)
        regridded = regrid_wavelength(table, self.wavelength_um)
        self._temperature = np.asarray(table.temperature_K, dtype=np.float64)
        # float64 once at set-up so the hot path does no dtype conversions
        self._log10_k = np.asarray(regridded.log10_value, dtype=np.float64)
        # wavelengths where the table has nothing (outside its range): exactly zero, not 10**floor
        self._present = np.any(self._log10_k > LOG10_FLOOR, axis=0).astype(np.float64)

    @property
    def t_range(self) -> tuple[float, float]:
        """(lowest, highest) tabulated temperature in K; outside it values are clamped."""
        return float(self._temperature[0]), float(self._temperature[-1])

    def log10_coefficient(self, temperature_K) -> np.ndarray:
        """log10 k(T) in cm⁵ molecule⁻², shape (n_levels, n_w), T clamped to :attr:`t_range`."""
        temperature = np.atleast_1d(np.asarray(temperature_K, dtype=np.float64))
        t_axis = self._temperature
        if t_axis.size == 1:
            return np.broadcast_to(self._log10_k[0], (temperature.size, self._log10_k.shape[1])).copy()
        t = np.clip(temperature, t_axis[0], t_axis[-1])
        upper = np.clip(np.searchsorted(t_axis, t, side="right"), 1, t_axis.size - 1)
        lower = upper - 1
        weight = ((t - t_axis[lower]) / (t_axis[upper] - t_axis[lower]))[:, None]
        return (1.0 - weight) * self._log10_k[lower] + weight * self._log10_k[upper]

    def opacity(self, temperature_K, pressure_bar, vmr_a, vmr_b, mmw_amu) -> np.ndarray:
        """CIA mass opacity at each level.

        Parameters
        ----------
        temperature_K, pressure_bar, vmr_a, vmr_b, mmw_amu : ndarray (n_levels,)
            Temperature, pressure, volume mixing ratios of the two partners
            and mean molecular weight (amu) of each level.

        Returns
        -------
        ndarray (n_levels, n_w)
            κ in cm² g⁻¹.
        """
        temperature = np.asarray(temperature_K, dtype=np.float64)
        number_density = np.asarray(pressure_bar, dtype=np.float64) * BAR_TO_DYN_CM2 / (K_B_CGS * temperature)
        per_gram = (np.asarray(vmr_a) * np.asarray(vmr_b) * number_density
                    / (np.asarray(mmw_amu, dtype=np.float64) * AMU_CGS))
        return 10.0 ** self.log10_coefficient(temperature) * self._present * per_gram[:, None]
