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
        # Hot-path form: natural log and its T-differences, so evaluation is two gathers,
        # one multiply-add and one exp.  Wavelengths where the table has nothing (outside
        # its range) get ln k = -inf and zero slope: exactly zero opacity, not 10**floor.
        absent = ~np.any(self._log10_k > LOG10_FLOOR, axis=0)
        ln_k = self._log10_k * np.log(10.0)
        slope = np.diff(ln_k, axis=0) if ln_k.shape[0] > 1 else np.zeros((1, ln_k.shape[1]))
        slope[:, absent] = 0.0
        ln_k[:, absent] = -np.inf
        self._ln_k = ln_k
        self._ln_k_step = slope

    @property
    def t_range(self) -> tuple[float, float]:
        """(lowest, highest) tabulated temperature in K; outside it values are clamped."""
        return float(self._temperature[0]), float(self._temperature[-1])

    def log10_coefficient(self, temperature_K) -> np.ndarray:
        """log10 k(T) in cm⁵ molecule⁻², shape (n_levels, n_w), T clamped to :attr:`t_range`."""
        temperature = np.atleast_1d(np.asarray(temperature_K, dtype=np.float64))
        lower, weight = self._bracket(temperature)
        upper = np.minimum(lower + 1, self._log10_k.shape[0] - 1)
        w = weight[:, None]
        return (1.0 - w) * self._log10_k[lower] + w * self._log10_k[upper]

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
        temperature = np.atleast_1d(np.asarray(temperature_K, dtype=np.float64))
        number_density = np.asarray(pressure_bar, dtype=np.float64) * BAR_TO_DYN_CM2 / (K_B_CGS * temperature)
        per_gram = (np.asarray(vmr_a) * np.asarray(vmr_b) * number_density
                    / (np.asarray(mmw_amu, dtype=np.float64) * AMU_CGS))
        lower, weight = self._bracket(temperature)
        with np.errstate(divide="ignore"):
            log_scale = np.log(per_gram)          # vmr = 0 gives -inf, i.e. zero opacity
        kappa = self._ln_k_step[np.minimum(lower, self._ln_k_step.shape[0] - 1)]
        kappa *= weight[:, None]
        kappa += self._ln_k[lower]
        kappa += log_scale[:, None]
        return np.exp(kappa, out=kappa)

    def _bracket(self, temperature: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Lower table index and fractional position of each (clamped) temperature."""
        t_axis = self._temperature
        if t_axis.size == 1:
            return np.zeros(temperature.size, dtype=int), np.zeros(temperature.size)
        t = np.clip(temperature, t_axis[0], t_axis[-1])
        lower = np.clip(np.searchsorted(t_axis, t, side="right") - 1, 0, t_axis.size - 2)
        return lower, (t - t_axis[lower]) / (t_axis[lower + 1] - t_axis[lower])
