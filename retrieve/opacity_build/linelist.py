"""A list of spectral lines of one absorber (or one isotopologue) and its line strengths.

Units: wavenumbers and energies in cm⁻¹, strengths in cm molecule⁻¹
(i.e. cm⁻¹ / (molecule cm⁻²)), Einstein A in s⁻¹, broadening coefficients
γ in cm⁻¹ atm⁻¹ (half width at half maximum) at 296 K, mass in amu.

Line strength
-------------
HITRAN form (reference strength at ``t_ref``; HITRAN documentation,
Šimečková et al. 2006, JQSRT 98, 130, eq. 3 and 4)::

    S(T) = S_ref Q(T_ref)/Q(T) exp(-c2 E''/T)/exp(-c2 E''/T_ref)
           (1 - exp(-c2 ν/T)) / (1 - exp(-c2 ν/T_ref))

ExoMol / Einstein-A form (Šimečková et al. 2006, eq. 20 with I_a = 1)::

    S(T) = g' A / (8 π c ν²) exp(-c2 E''/T) (1 - exp(-c2 ν/T)) / Q(T)

with c2 = hc/k (:data:`retrieve.constants.C2_CM_K`), c in cm s⁻¹.

Isotopologue abundance: HITRAN strengths are already weighted by the
terrestrial isotopologue abundance (``abundance_weighted=True``, the default
for the HITRAN reader). Einstein-A strengths are per molecule of that
isotopologue; with ``abundance_weighted=False`` :meth:`LineList.strength`
multiplies by ``isotopologue_abundance`` (1.0 = the isotopologue *is* the
absorber, the ExoMol reader's default).

Pressure broadening
-------------------
Lorentz HWHM γ(T, P) = Σ_b x_b γ_b (P / 1 atm) (296 K / T)^n_b over the
broadeners b ∈ {H2, He} with number fractions x_b of the broadening gas.
Where per-line values are absent (None) the defaults
:data:`DEFAULT_BROADENING` are used.
"""
from __future__ import annotations

import dataclasses
from collections.abc import Callable, Iterable, Iterator

import numpy as np

from ..constants import ATM_TO_BAR, C2_CM_K, C_CGS, HE_TO_H2_SOLAR

T_REF_BROADENING = 296.0  # K, HITRAN reference temperature of γ and n

#: Defaults (γ cm⁻¹ atm⁻¹ at 296 K, n) when a line list has no per-line values.
#: H2: 0.07 / 0.5 is the ExoMol-recommended generic default (``.def`` files,
#: Tennyson et al. 2016, J. Mol. Spectrosc. 327, 73, sec. 4.7 - value from memory);
#: He: 0.04 / 0.5, typical He widths being ~0.6 of H2 widths for small molecules
#: (common practice, no source).
DEFAULT_BROADENING = {"H2": (0.07, 0.5), "He": (0.04, 0.5)}

#: Default composition of the broadening gas: H2 + He at the solar ratio.
SOLAR_BROADENERS = {"H2": 1.0 / (1.0 + HE_TO_H2_SOLAR), "He": HE_TO_H2_SOLAR / (1.0 + HE_TO_H2_SOLAR)}


def _opt_array(x, n: int, name: str):
    if x is None:
        return None
    arr = np.asarray(x, dtype=np.float64)
    if arr.ndim == 0:
        arr = np.full(n, float(arr))
    if arr.shape != (n,):
        raise ValueError(f"LineList.{name} has shape {arr.shape}, expected ({n},)")
    return arr


@dataclasses.dataclass
class LineList:
    """Lines of one absorber or isotopologue.

    Parameters
    ----------
    species : str
        Absorber name used for the table (``"CO"``).
    wavenumber_cm, e_lower_cm : ndarray (n,)
        Line position and lower-state energy, cm⁻¹.
    mass_amu : float
        Molecular mass for the Doppler width.
    partition : callable
        ``Q(T_K) -> Q``, vectorised over T.
    strength_ref : ndarray (n,) or None
        Reference strength at ``t_ref`` (HITRAN form), cm molecule⁻¹.
    t_ref : float
        Temperature of ``strength_ref``, K (HITRAN: 296).
    partition_ref : float or None
        Q(t_ref); computed from ``partition`` if None.
    einstein_a, g_upper : ndarray (n,) or None
        Einstein A (s⁻¹) and upper-state degeneracy (ExoMol form); used
        when ``strength_ref`` is None.
    isotopologue_abundance : float
        Abundance of this isotopologue in the absorber.
    abundance_weighted : bool
        True if strengths already include ``isotopologue_abundance``
        (HITRAN); False to have :meth:`strength` multiply by it.
    gamma_h2, n_h2, gamma_he, n_he : ndarray (n,) or None
        Per-line broadening by H2 and He (HWHM cm⁻¹ atm⁻¹ at 296 K and
        temperature exponent); None -> :data:`DEFAULT_BROADENING`.
    shift_cm_atm : ndarray (n,) or None
        Pressure shift δ (cm⁻¹ atm⁻¹); None = no shift (HITRAN's δ_air does
        not apply to H2/He, so the HITRAN reader leaves this None).
    gamma_custom : callable or None
        Hook for special line profiles: ``gamma_custom(linelist, T_K, P_bar,
        broadeners) -> (n,) Lorentz HWHM cm⁻¹``; replaces the standard formula.
    isotopologue : str
        Free-text label (``"12C-16O"``, HITRAN ``"5/1"``).
    """

    species: str
    wavenumber_cm: np.ndarray
    e_lower_cm: np.ndarray
    mass_amu: float
    partition: Callable
    strength_ref: np.ndarray | None = None
    t_ref: float = 296.0
    partition_ref: float | None = None
    einstein_a: np.ndarray | None = None
    g_upper: np.ndarray | None = None
    isotopologue_abundance: float = 1.0
    abundance_weighted: bool = True
    gamma_h2: np.ndarray | None = None
    n_h2: np.ndarray | None = None
    gamma_he: np.ndarray | None = None
    n_he: np.ndarray | None = None
    shift_cm_atm: np.ndarray | None = None
    gamma_custom: Callable | None = None
    isotopologue: str = ""

    def __post_init__(self):
        self.wavenumber_cm = np.asarray(self.wavenumber_cm, dtype=np.float64).ravel()
        n = self.wavenumber_cm.size
        self.e_lower_cm = _opt_array(self.e_lower_cm, n, "e_lower_cm")
        for name in ("strength_ref", "einstein_a", "g_upper", "gamma_h2", "n_h2", "gamma_he", "n_he",
                     "shift_cm_atm"):
            setattr(self, name, _opt_array(getattr(self, name), n, name))
        if self.strength_ref is None and (self.einstein_a is None or self.g_upper is None):
            raise ValueError("LineList needs strength_ref, or einstein_a and g_upper")

    def __len__(self) -> int:
        return self.wavenumber_cm.size

    def _q_ref(self) -> float:
        if self.partition_ref is not None:
            return float(self.partition_ref)
        return float(self.partition(self.t_ref))

    def strength(self, temperature_K: float) -> np.ndarray:
        """Line strengths S(T), cm molecule⁻¹ (see module docstring for the formulae)."""
        t = float(temperature_K)
        nu, el = self.wavenumber_cm, self.e_lower_cm
        q = float(self.partition(t))
        if self.strength_ref is not None:
            tr = float(self.t_ref)
            boltz = np.exp(-C2_CM_K * el * (1.0 / t - 1.0 / tr))
            stim = -np.expm1(-C2_CM_K * nu / t) / -np.expm1(-C2_CM_K * nu / tr)
            s = self.strength_ref * (self._q_ref() / q) * boltz * stim
        else:
            s = (self.g_upper * self.einstein_a / (8.0 * np.pi * C_CGS * nu ** 2)
                 * np.exp(-C2_CM_K * el / t) * -np.expm1(-C2_CM_K * nu / t) / q)
        if not self.abundance_weighted:
            s = s * self.isotopologue_abundance
        return s

    def lorentz_hwhm(self, temperature_K: float, pressure_bar: float,
                     broadeners: dict[str, float] | None = None) -> np.ndarray:
        """Pressure-broadened Lorentz HWHM, cm⁻¹.

        Parameters
        ----------
        broadeners : dict
            Number fractions of the broadening gas, keys ``"H2"``, ``"He"``;
            default :data:`SOLAR_BROADENERS`.
        """
        broadeners = SOLAR_BROADENERS if broadeners is None else broadeners
        if self.gamma_custom is not None:
            return np.asarray(self.gamma_custom(self, temperature_K, pressure_bar, broadeners), dtype=np.float64)
        unknown = set(broadeners) - {"H2", "He"}
        if unknown:
            raise ValueError(f"unknown broadener(s) {sorted(unknown)}; use H2 and He")
        p_atm = pressure_bar / ATM_TO_BAR
        ratio = T_REF_BROADENING / float(temperature_K)
        fields = {"H2": (self.gamma_h2, self.n_h2), "He": (self.gamma_he, self.n_he)}
        total = np.zeros(len(self))
        for name, frac in broadeners.items():
            if frac == 0:
                continue
            gamma, n_exp = fields[name]
            g0, n0 = DEFAULT_BROADENING[name]
            gamma = g0 if gamma is None else gamma
            n_exp = n0 if n_exp is None else n_exp
            total = total + frac * gamma * ratio ** n_exp
        return total * p_atm

    def line_positions(self, pressure_bar: float) -> np.ndarray:
        """Line positions at pressure, cm⁻¹ (applies ``shift_cm_atm`` if given)."""
        if self.shift_cm_atm is None:
            return self.wavenumber_cm
        return self.wavenumber_cm + self.shift_cm_atm * (pressure_bar / ATM_TO_BAR)

    def select(self, mask) -> "LineList":
        """A new LineList with the lines where ``mask`` is True (or at integer indices)."""
        kw = {}
        for f in dataclasses.fields(self):
            v = getattr(self, f.name)
            kw[f.name] = v[mask] if isinstance(v, np.ndarray) else v
        return LineList(**kw)


#: What ``line_source`` may be: one LineList, a list of them, or a callable
#: returning a fresh iterator of LineList chunks on every call.
LineSource = LineList | Iterable | Callable[[], Iterator[LineList]]


def iter_chunks(line_source) -> Iterator[LineList]:
    """Iterate over the LineList chunks of a line source (see :data:`LineSource`)."""
    if isinstance(line_source, LineList):
        yield line_source
    elif callable(line_source):
        yield from line_source()
    else:
        yield from line_source


def _fill_value(name: str) -> float:
    """Value standing in for a missing per-line field when joining chunks."""
    if name == "shift_cm_atm":
        return 0.0
    gas = "H2" if name.endswith("h2") else "He"
    return DEFAULT_BROADENING[gas][0 if name.startswith("gamma") else 1]


_OPTIONAL_PER_LINE = ("gamma_h2", "n_h2", "gamma_he", "n_he", "shift_cm_atm")


def concatenate(chunks: Iterable[LineList]) -> LineList:
    """Join chunks of the same absorber into one LineList (for caching a streamed source)."""
    chunks = [c for c in chunks if len(c)]
    if not chunks:
        raise ValueError("no lines to concatenate")
    kw = {}
    for f in dataclasses.fields(chunks[0]):
        values = [getattr(c, f.name) for c in chunks]
        if any(isinstance(v, np.ndarray) for v in values):
            if any(v is None for v in values):
                if f.name not in _OPTIONAL_PER_LINE:
                    raise ValueError(f"cannot concatenate chunks: {f.name} missing in some")
                values = [np.full(len(c), _fill_value(f.name)) if v is None else v
                          for c, v in zip(chunks, values)]
            kw[f.name] = np.concatenate(values)
        else:
            kw[f.name] = values[0]
    return LineList(**kw)
