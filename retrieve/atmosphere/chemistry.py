"""Free chemistry: constant-with-height volume mixing ratios (VMRs).

Each absorber ``X`` has a parameter ``log_vmr_X`` (log10 VMR, the same at all
levels).  H₂ and He fill the rest of the gas with the solar number ratio
He/H₂ = ``constants.HE_TO_H2_SOLAR`` (Asplund et al. 2009, ARA&A 47, 481).
"""
from __future__ import annotations

import dataclasses
from collections.abc import Mapping, Sequence

import numpy as np

from ..constants import HE_TO_H2_SOLAR, MASS_AMU
from ..errors import ConfigError, ModelEvaluationError


@dataclasses.dataclass
class Composition:
    """Gas composition at the model levels.

    Attributes
    ----------
    vmr : dict str -> ndarray (n_levels,)
        Absorbers plus ``"H2"`` and ``"He"``.
    absorber_vmr : ndarray (n_absorbers,)
        The absorbers' VMRs in the order of :attr:`FreeChemistry.absorbers`.
    mmw_amu : ndarray (n_levels,)
        Mean molecular weight in amu.
    """

    vmr: dict
    absorber_vmr: np.ndarray
    mmw_amu: np.ndarray


class FreeChemistry:
    """Constant log10 VMRs for the absorbers, H₂ + He for the rest.

    Parameters
    ----------
    absorbers : sequence of str
        Species names; each must have a mass in ``constants.MASS_AMU``.
    """

    def __init__(self, absorbers: Sequence[str]):
        self.absorbers = list(absorbers)
        unknown = [s for s in self.absorbers if s not in MASS_AMU]
        if unknown:
            raise ConfigError(f"[model] absorbers: no molecular mass known for {unknown}; "
                              f"known species: {sorted(MASS_AMU)}")
        if len(set(self.absorbers)) != len(self.absorbers):
            raise ConfigError(f"[model] absorbers: duplicate names in {self.absorbers}")
        self.parameter_names = [f"log_vmr_{s}" for s in self.absorbers]
        self._mass = np.array([MASS_AMU[s] for s in self.absorbers], dtype=np.float64)
        # the H2+He filler: fractions of the remainder and its mean mass
        self._f_h2 = 1.0 / (1.0 + HE_TO_H2_SOLAR)
        self._f_he = HE_TO_H2_SOLAR / (1.0 + HE_TO_H2_SOLAR)
        self._m_fill = self._f_h2 * MASS_AMU["H2"] + self._f_he * MASS_AMU["He"]

    def evaluate(self, params: Mapping[str, float], n_levels: int) -> Composition:
        """VMRs and mean molecular weight at ``n_levels`` levels.

        Raises
        ------
        ModelEvaluationError
            ``"VMRs sum above 1"`` if the absorbers alone exceed unity.
        """
        log_vmr = np.array([params[name] for name in self.parameter_names], dtype=np.float64)
        with np.errstate(over="ignore"):      # a huge log VMR is refused just below, not warned about
            vmr = 10.0 ** log_vmr
        total = float(vmr.sum())
        if not np.isfinite(total):
            raise ModelEvaluationError("non-finite parameter", "log_vmr")
        if total > 1.0:
            raise ModelEvaluationError("VMRs sum above 1", f"sum = {total:.4g}")
        rest = 1.0 - total
        mmw = float(vmr @ self._mass + rest * self._m_fill)
        out = {s: np.full(n_levels, v) for s, v in zip(self.absorbers, vmr)}
        out["H2"] = np.full(n_levels, rest * self._f_h2)
        out["He"] = np.full(n_levels, rest * self._f_he)
        return Composition(vmr=out, absorber_vmr=vmr, mmw_amu=np.full(n_levels, mmw))
