"""The (wavelength, T, P) grid an opacity table is built on, and the fine calculation grid.

Defaults (all configurable)
---------------------------
* wavelength 0.8–5.0 µm in bins of constant resolving power R = λ/Δλ = 1000
  (edges log-spaced: λ_{i+1}/λ_i = 1 + 1/R);
* 16 temperatures, log-spaced 200–3000 K (:data:`DEFAULT_TEMPERATURES_K`);
* 19 pressures, two per decade, 1e-6–1e3 bar (:data:`DEFAULT_PRESSURES_BAR`);
* far-wing cut-off 25 cm⁻¹ from line centre (common practice, no source);
* fine grid uniform in wavenumber with spacing 0.01 cm⁻¹;
* 16 Gauss–Legendre g-points on [0, 1] for k-tables.

The fine grid resolves pressure-broadened profiles (γ ≳ 0.05 cm⁻¹ at ≳ 1 bar)
but not Doppler cores at low pressure in the near-infrared (α_D ≈ 0.005–0.03
cm⁻¹); unresolved profiles keep their integral (see :mod:`.dit`), so averaged
cross sections stay right while k-tables at low P smear the strongest cores.
Use a smaller ``fine_resolution`` where that matters.
"""
from __future__ import annotations

import dataclasses
import math

import numpy as np

DEFAULT_TEMPERATURES_K = tuple(float(t) for t in np.round(np.geomspace(200.0, 3000.0, 16), 1))
DEFAULT_PRESSURES_BAR = tuple(float(p) for p in 10.0 ** np.arange(-6.0, 3.01, 0.5))


@dataclasses.dataclass
class BuildGrid:
    """Build parameters.

    Parameters
    ----------
    wavelength_range_um : (float, float)
        First bin's lower edge and (at least) the last bin's upper edge, µm.
    resolving_power : float
        λ/Δλ of the output bins.
    temperatures_K, pressures_bar : sequence of float
        Table axes (sorted ascending on construction).
    wing_cutoff_cm : float
        Line profiles are truncated at ±this distance from line centre, cm⁻¹.
    fine_resolution : float
        Spacing of the fine calculation grid, cm⁻¹ (uniform in wavenumber).
    n_g : int
        Number of Gauss–Legendre g-points for k-tables.
    reduction : {"mean", "sample"}
        Cross-section tables: bin-averaged σ (default) or σ sampled at the bin centre.
    width_step : float
        Step in ln(Lorentz width) of the discrete-integral-transform width grid
        (0.1 -> profile errors ≲ 0.2 %).
    doppler_step : float
        Step in ln(Doppler width); Gaussian tails are steep, so this is finer
        (0.02 -> errors ≲ 0.5 % down to 10⁻³ of the line peak).
    broadeners : dict or None
        Number fractions of the broadening gas (``{"H2": x, "He": 1-x}``);
        None = solar H2/He (:data:`retrieve.opacity_build.linelist.SOLAR_BROADENERS`).
    segment_points : int
        Fine-grid points per FFT segment (memory/speed trade-off).
    """

    wavelength_range_um: tuple[float, float] = (0.8, 5.0)
    resolving_power: float = 1000.0
    temperatures_K: tuple = DEFAULT_TEMPERATURES_K
    pressures_bar: tuple = DEFAULT_PRESSURES_BAR
    wing_cutoff_cm: float = 25.0
    fine_resolution: float = 0.01
    n_g: int = 16
    reduction: str = "mean"
    width_step: float = 0.1
    doppler_step: float = 0.02
    broadeners: dict | None = None
    segment_points: int = 1 << 14

    def __post_init__(self):
        lo, hi = (float(x) for x in self.wavelength_range_um)
        if not 0 < lo < hi:
            raise ValueError(f"wavelength_range_um must be 0 < low < high, got {self.wavelength_range_um}")
        self.wavelength_range_um = (lo, hi)
        self.temperatures_K = tuple(sorted(float(t) for t in self.temperatures_K))
        self.pressures_bar = tuple(sorted(float(p) for p in self.pressures_bar))
        if self.reduction not in ("mean", "sample"):
            raise ValueError(f"reduction must be 'mean' or 'sample', got {self.reduction!r}")
        for name in ("resolving_power", "wing_cutoff_cm", "fine_resolution", "width_step", "doppler_step"):
            if not float(getattr(self, name)) > 0:
                raise ValueError(f"{name} must be positive")

    def output_edges(self) -> np.ndarray:
        """Bin edges in µm, ascending, constant R: λ_{i+1} = λ_i (1 + 1/R)."""
        lo, hi = self.wavelength_range_um
        step = np.log1p(1.0 / self.resolving_power)
        n = int(np.ceil(np.log(hi / lo) / step - 1e-9))
        # math.exp (the C library's exp), not np.exp: numpy picks its exp kernel by CPU (AVX2,
        # AVX-512, …) and those differ in the last bit, which would make rebuilt tables differ
        # between machines; the C library's result does not depend on numpy's dispatch
        return lo * np.array([math.exp(step * i) for i in range(n + 1)])

    def output_wavelengths(self) -> np.ndarray:
        """Bin centres in µm (geometric mean of the edges)."""
        e = self.output_edges()
        return np.sqrt(e[:-1] * e[1:])

    def fine_wavenumbers(self) -> np.ndarray:
        """The fine calculation grid, cm⁻¹, covering the output bins (ascending)."""
        e = self.output_edges()
        nu_lo, nu_hi = 1e4 / e[-1], 1e4 / e[0]
        d = self.fine_resolution
        i0, i1 = int(np.floor(nu_lo / d)), int(np.ceil(nu_hi / d))
        return np.arange(i0, i1 + 1) * d

    def g_quadrature(self) -> tuple[np.ndarray, np.ndarray]:
        """Gauss–Legendre nodes and weights mapped to [0, 1] (weights sum to 1)."""
        x, w = np.polynomial.legendre.leggauss(int(self.n_g))
        return 0.5 * (x + 1.0), 0.5 * w

    def as_dict(self) -> dict:
        """JSON-ready build parameters for the provenance record."""
        d = dataclasses.asdict(self)
        d["wavelength_range_um"] = list(self.wavelength_range_um)
        d["temperatures_K"] = list(self.temperatures_K)
        d["pressures_bar"] = list(self.pressures_bar)
        return d
