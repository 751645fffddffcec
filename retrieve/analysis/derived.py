"""Derived quantities of a retrieval: mass, C/O, metallicity and effective temperature.

Methods (also written into the summary's ``method`` column):

* **Mass** ``M = g R² / G`` with ``g = 10^log_g`` cm s⁻² and ``R = radius_rjup``
  R_Jup (IAU 2015 nominal), in M_Jup.
* **C/O** the number ratio of carbon to oxygen atoms carried by the retrieved
  absorbers, ``Σ_i n_C,i x_i / Σ_i n_O,i x_i`` (x = VMR, n = atoms per
  molecule); for H₂O, CO, CH₄, CO₂ this is
  ``(CO + CH₄ + CO₂) / (H₂O + CO + 2 CO₂)``.  Only defined when both a carbon
  and an oxygen carrier are retrieved.
* **Metallicity** ``[M/H] = log10(Σ_Z n_Z / n_H) − log10(Σ_Z (n_Z/n_H)_⊙)`` where
  Z runs over the elements heavier than He carried by the retrieved absorbers
  (so the solar sum uses the *same* elements), n_H counts H in H₂ (the filling
  gas, with He at the solar He/H₂ ratio) and in the absorbers; solar
  abundances from Asplund et al. (2009, ARA&A 47, 481, Table 1).
* **Effective temperature** from the model's emergent flux:
  ``σ T_eff⁴ = ∫ F_λ dλ`` over the model grid (trapezoid rule) plus the two
  tails outside it, each taken as a blackbody at the brightness temperature
  of the outermost 2 % of the grid; the blackbody fractions use the series
  ``F(0→λ)/σT⁴ = (15/π⁴) Σ_n e^{−nx} (x³/n + 3x²/n² + 6x/n³ + 6/n⁴)``,
  ``x = hc/λkT`` (e.g. Modest, *Radiative Heat Transfer*, 3rd ed., eq. 1.23).
"""
from __future__ import annotations

import math
import re
from collections.abc import Mapping

import numpy as np

from ..constants import C_SI, G_SI, H_SI, HE_TO_H2_SOLAR, K_B_SI, M_JUP_KG, R_JUP_M, SIGMA_SB_SI

# log10 ε = log10(n_X/n_H) + 12, solar photosphere, Asplund et al. (2009) Table 1 (values from memory).
SOLAR_LOG_EPS = {
    "C": 8.43, "N": 7.83, "O": 8.69, "Na": 6.24, "Mg": 7.60, "Al": 6.45, "Si": 7.51, "P": 5.41,
    "S": 7.12, "K": 5.03, "Ca": 6.34, "Ti": 4.95, "V": 3.93, "Cr": 5.64, "Fe": 7.50,
}

METHODS = {
    "mass_mjup": "M = g R^2 / G from log_g (cgs) and radius_rjup (IAU nominal R_Jup, M_Jup)",
    "c_to_o": "C/O = sum(n_C x) / sum(n_O x) over retrieved absorbers (= (CO+CH4+CO2)/(H2O+CO+2CO2))",
    "metallicity": "[M/H] = log10(sum_Z n_Z/n_H) - log10 solar (Asplund 2009) over elements Z of the "
                   "retrieved absorbers; H from H2 fill (solar He/H2) and absorbers",
    "teff_k": "sigma Teff^4 = integral of model F_lambda over the model grid + blackbody tails at the "
              "brightness temperature of the outer 2% of the grid",
}

_ELEMENT = re.compile(r"([A-Z][a-z]?)(\d*)")


def atoms(formula: str) -> dict[str, int]:
    """Atom counts of a simple formula, e.g. ``"CO2"`` → ``{"C": 1, "O": 2}`` (charges ignored)."""
    formula = formula.rstrip("+-")
    out: dict[str, int] = {}
    pos = 0
    for m in _ELEMENT.finditer(formula):
        if m.start() != pos:
            raise ValueError(f"cannot parse formula {formula!r}")
        out[m.group(1)] = out.get(m.group(1), 0) + int(m.group(2) or 1)
        pos = m.end()
    if pos != len(formula):
        raise ValueError(f"cannot parse formula {formula!r}")
    return out


def mass_mjup(log_g, radius_rjup):
    """Mass in M_Jup from log10 g (cgs) and radius (R_Jup)."""
    g_si = 10.0 ** (np.asarray(log_g, dtype=float) - 2.0)
    r_m = np.asarray(radius_rjup, dtype=float) * R_JUP_M
    return g_si * r_m ** 2 / G_SI / M_JUP_KG


def _vmrs(params: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
    return {k[len("log_vmr_"):]: 10.0 ** np.asarray(v, dtype=float)
            for k, v in params.items() if k.startswith("log_vmr_")}


def element_abundances(vmr: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Number of atoms of each element per molecule of gas, H included (H₂ fills, He at solar ratio)."""
    total = sum(np.asarray(x, dtype=float) for x in vmr.values()) if vmr else 0.0
    x_h2 = (1.0 - total) / (1.0 + HE_TO_H2_SOLAR)
    out: dict[str, np.ndarray] = {"H": 2.0 * x_h2}
    for species, x in vmr.items():
        for el, n in atoms(species).items():
            out[el] = out.get(el, 0.0) + n * np.asarray(x, dtype=float)
    return out


def c_to_o(vmr: Mapping[str, np.ndarray]):
    """C/O number ratio, or None when no carbon or no oxygen carrier is among the absorbers."""
    carriers = {el for s in vmr for el in atoms(s)}
    if not {"C", "O"} <= carriers:
        return None
    ab = element_abundances(vmr)
    return ab["C"] / ab["O"]


def metallicity(vmr: Mapping[str, np.ndarray]):
    """[M/H] over the elements of the absorbers that have a solar abundance, or None if there are none."""
    ab = element_abundances(vmr)
    metals = [el for el in ab if el in SOLAR_LOG_EPS]
    if not metals:
        return None
    n_z = sum(ab[el] for el in metals)
    solar = sum(10.0 ** (SOLAR_LOG_EPS[el] - 12.0) for el in metals)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.log10(n_z / ab["H"]) - math.log10(solar)


def blackbody_fraction_below(wavelength_um, temperature_K, terms: int = 60):
    """Fraction of σT⁴ emitted at wavelengths shorter than ``wavelength_um`` (series, see module docstring)."""
    x = H_SI * C_SI / (np.asarray(wavelength_um, dtype=float) * 1e-6 * K_B_SI * np.asarray(temperature_K, dtype=float))
    n = np.arange(1, terms + 1, dtype=float).reshape((-1,) + (1,) * np.ndim(x))
    s = np.exp(-n * x) * (x ** 3 / n + 3 * x ** 2 / n ** 2 + 6 * x / n ** 3 + 6 / n ** 4)
    return 15.0 / math.pi ** 4 * s.sum(axis=0)


def brightness_temperature(wavelength_um, flux_surface):
    """T with π B_λ(T) = F_λ (F_λ in W m⁻² µm⁻¹ at the surface)."""
    lam = np.asarray(wavelength_um, dtype=float) * 1e-6
    f_si = np.asarray(flux_surface, dtype=float) * 1e6  # per metre of wavelength
    return H_SI * C_SI / (lam * K_B_SI) / np.log1p(2 * math.pi * H_SI * C_SI ** 2 / (lam ** 5 * f_si))


def effective_temperature(wavelength_um, flux_surface, edge_fraction: float = 0.02) -> float:
    """T_eff (K) from an emergent spectrum F_λ (W m⁻² µm⁻¹ at the surface) with blackbody tails."""
    lam = np.asarray(wavelength_um, dtype=float)
    f = np.asarray(flux_surface, dtype=float)
    n_edge = max(1, int(round(edge_fraction * lam.size)))
    inner = float(np.trapezoid(f, lam))
    t_lo = float(brightness_temperature(np.mean(lam[:n_edge]), np.mean(f[:n_edge])))
    t_hi = float(brightness_temperature(np.mean(lam[-n_edge:]), np.mean(f[-n_edge:])))
    below = SIGMA_SB_SI * t_lo ** 4 * float(blackbody_fraction_below(lam[0], t_lo))
    above = SIGMA_SB_SI * t_hi ** 4 * (1.0 - float(blackbody_fraction_below(lam[-1], t_hi)))
    return ((inner + below + above) / SIGMA_SB_SI) ** 0.25


def derived_from_parameters(params: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Mass, C/O and [M/H] wherever the needed parameters are present (free or fixed)."""
    out = {}
    if "log_g" in params and "radius_rjup" in params:
        out["mass_mjup"] = mass_mjup(params["log_g"], params["radius_rjup"])
    vmr = _vmrs(params)
    if vmr:
        co = c_to_o(vmr)
        if co is not None:
            out["c_to_o"] = co
        mh = metallicity(vmr)
        if mh is not None:
            out["metallicity"] = mh
    return out
