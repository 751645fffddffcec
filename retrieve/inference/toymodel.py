"""A linear toy model with the forward-model interface, for checks with analytic posteriors.

``LinearModel`` predicts, for every dataset, ``m(λ) = Σ_k c_k (λ − λ_ref)^k``
with coefficients ``c_k`` named ``coef_<k>`` (in W m⁻² µm⁻¹ per µm^k).  With
Gaussian priors and Gaussian noise its posterior is Gaussian and known in
closed form (Bishop 2006, *Pattern Recognition and Machine Learning*,
eqs. 3.53–3.54), which is what the inference tests compare against.

It is *not* an atmosphere model; it exists so that the inference engine can
be checked independently of the physics.
"""
from __future__ import annotations

from types import SimpleNamespace

import numpy as np

from ..errors import ModelEvaluationError


class LinearModel:
    """Polynomial model of degree ``n_coef − 1`` on every dataset's wavelengths.

    Parameters
    ----------
    datasets : sequence of Dataset
    n_coef : int
    wavelength_ref_um : float
    fail_above : float, optional
        Raise :class:`ModelEvaluationError` ("toy failure region") when
        ``coef_0`` exceeds this value (to exercise failure counting).
    """

    def __init__(self, datasets, n_coef: int = 2, wavelength_ref_um: float = 1.0, fail_above: float | None = None):
        self.parameter_names = [f"coef_{k}" for k in range(n_coef)]
        self.fail_above = fail_above
        self.design = {d.name: np.vander(np.asarray(d.wavelength_um, float) - wavelength_ref_um, n_coef,
                                         increasing=True) for d in datasets}

    def evaluate(self, params):
        c = np.array([params[n] for n in self.parameter_names], dtype=float)
        if self.fail_above is not None and c[0] > self.fail_above:
            raise ModelEvaluationError("toy failure region", f"coef_0 = {c[0]:g}")
        return SimpleNamespace(per_dataset={name: a @ c for name, a in self.design.items()})


class LinearModelFactory:
    """Picklable ``factory(object_data) -> LinearModel``."""

    def __init__(self, n_coef: int = 2, wavelength_ref_um: float = 1.0, fail_above: float | None = None):
        self.n_coef, self.wavelength_ref_um, self.fail_above = n_coef, wavelength_ref_um, fail_above

    def __call__(self, object_data):
        return LinearModel(object_data.datasets, self.n_coef, self.wavelength_ref_um, self.fail_above)
