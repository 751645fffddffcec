"""Log-posterior of a retrieval: priors + Gaussian likelihood over all datasets.

The model interface is deliberately small, so that analytic toy models and
the full :class:`retrieve.forward_model.ForwardModel` plug in alike: a model
has ``parameter_names`` (the physical parameters it needs) and
``evaluate(params: Mapping[str, float])`` returning an object whose
``per_dataset`` maps dataset name → model values at that dataset's points
(W m⁻² µm⁻¹).  It may raise :class:`retrieve.errors.ModelEvaluationError`.

For dataset ``<name>`` with data ``d``, model ``m`` and optional flux-scale
factor ``s = scale_<name>`` (multiplies the *model*, i.e. absorbs an
absolute-calibration error of that dataset), the residual is ``r = d − s·m``
and the dataset contributes :meth:`NoiseModel.log_likelihood` (see
:mod:`retrieve.inference.noise`).  Datasets are independent of each other.

A failed evaluation (``ModelEvaluationError``, non-finite model values,
non-positive-definite covariance) gives ``-inf``; its reason is counted in
:attr:`LogPosterior.failures` and reported at the end of the run.
"""
from __future__ import annotations

import math
from collections import Counter
from collections.abc import Callable, Mapping, Sequence

import numpy as np

from ..errors import ConfigError, ModelEvaluationError
from .noise import NoiseModel
from .priors import Prior

#: nuisance-parameter name patterns, per dataset
NUISANCE_PREFIXES = ("scale_", "log_inflate_", "gp_amp_", "gp_length_um_")


def nuisance_names(dataset: str, scale: bool, inflate: bool, correlated: bool) -> list[str]:
    """Names of the likelihood hyperparameters switched on for ``dataset``."""
    names = []
    if scale:
        names.append(f"scale_{dataset}")
    if inflate:
        names.append(f"log_inflate_{dataset}")
    if correlated:
        names += [f"gp_amp_{dataset}", f"gp_length_um_{dataset}"]
    return names


class DatasetTerm:
    """Likelihood term of one dataset.

    Parameters
    ----------
    dataset : retrieve.observations.Dataset
    scale, inflate, correlated : bool
        Which nuisance parameters are active.
    """

    def __init__(self, dataset, scale=False, inflate=False, correlated=False):
        self.name = dataset.name
        self.data = np.asarray(dataset.flux, dtype=float)
        self.scale = bool(scale)
        self.inflate = bool(inflate)
        self.correlated = bool(correlated)
        if self.correlated and dataset.covariance is not None:
            source = dataset.source if dataset.source is not None else f"dataset {dataset.name!r}"
            raise ConfigError(f"{source}: dataset {dataset.name!r} carries a full covariance, so "
                              "correlated_noise = true cannot be used; drop one of the two")
        self.noise = NoiseModel(dataset.wavelength_um, dataset.variance(), dataset.covariance,
                                inflate=inflate, correlated=correlated)

    def nuisance_names(self) -> list[str]:
        return nuisance_names(self.name, self.scale, self.inflate, self.correlated)

    def log_likelihood(self, model_values: np.ndarray, params: Mapping[str, float]) -> float:
        """ln L of this dataset given model values and all parameters."""
        s = params[f"scale_{self.name}"] if self.scale else 1.0
        hyper = {}
        if self.inflate:
            hyper["log_inflate"] = params[f"log_inflate_{self.name}"]
        if self.correlated:
            amp, length = params[f"gp_amp_{self.name}"], params[f"gp_length_um_{self.name}"]
            if not (0.0 <= amp <= 1.0 and length > 0.0):
                raise ModelEvaluationError("noise hyperparameter out of range")
            hyper.update(gp_amp=amp, gp_length_um=length)
        return self.noise.log_likelihood(self.data - s * model_values, **hyper)


class LogPosterior:
    """ln p(θ | d) up to a constant, as a picklable callable of the free-parameter vector.

    Parameters
    ----------
    model_factory : callable
        ``model_factory(object_data) -> model`` (see module docstring).  The
        model is built lazily on first use and *not* pickled: a copy sent to a
        worker process rebuilds its own model once.
    object_data : retrieve.observations.ObjectData
    free : mapping of str to Prior
        Free parameters in sampling order.
    fixed : mapping of str to float
        Fixed parameters.
    noise : mapping of str to (scale, inflate, correlated)
        Nuisance switches per dataset name (missing datasets: all off).
    """

    def __init__(self, model_factory: Callable, object_data, free: Mapping[str, Prior],
                 fixed: Mapping[str, float] | None = None,
                 noise: Mapping[str, Sequence[bool]] | None = None):
        self.model_factory = model_factory
        self.object_data = object_data
        self.free = dict(free)
        self.fixed = {k: float(v) for k, v in (fixed or {}).items()}
        self.param_names = list(self.free)
        self.priors = [self.free[k] for k in self.param_names]
        noise = dict(noise or {})
        self.terms = [DatasetTerm(d, *noise.get(d.name, (False, False, False)))
                      for d in object_data.datasets]
        self.failures: Counter = Counter()
        self.n_evaluations = 0
        self._model = None

    # -- pickling: ship the recipe, rebuild the model in the receiving process
    def __getstate__(self):
        state = self.__dict__.copy()
        state["_model"] = None
        return state

    @property
    def model(self):
        """The forward model, built on first access."""
        if self._model is None:
            self._model = self.model_factory(self.object_data)
        return self._model

    @property
    def ndim(self) -> int:
        return len(self.param_names)

    def params(self, theta: Sequence[float]) -> dict[str, float]:
        """All parameters (fixed and free) as a name → value dict."""
        out = dict(self.fixed)
        out.update(zip(self.param_names, map(float, theta)))
        return out

    def log_prior(self, theta: Sequence[float]) -> float:
        """Sum of the free parameters' log prior densities."""
        total = 0.0
        for prior, x in zip(self.priors, theta):
            total += float(prior.log_pdf(x))
            if total == -math.inf:
                return total
        return total

    def model_output(self, params: Mapping[str, float]):
        """Evaluate the forward model (it picks the physical parameters it needs out of ``params``)."""
        return self.model.evaluate(params)

    def log_likelihood(self, params: Mapping[str, float], output=None) -> float:
        """ln L (raises ModelEvaluationError on failure)."""
        if output is None:
            output = self.model_output(params)
        total = 0.0
        for term in self.terms:
            values = np.asarray(output.per_dataset[term.name], dtype=float)
            if not np.all(np.isfinite(values)):
                raise ModelEvaluationError("non-finite model flux")
            total += term.log_likelihood(values, params)
        if not math.isfinite(total):
            raise ModelEvaluationError("non-finite log-likelihood")
        return total

    def evaluate(self, theta: Sequence[float]) -> tuple[float, str]:
        """``(ln posterior, failure reason or "")``; never raises for a model failure."""
        lp = self.log_prior(theta)
        if lp == -math.inf:
            return -math.inf, ""
        self.n_evaluations += 1
        try:
            with np.errstate(all="ignore"):
                ll = self.log_likelihood(self.params(theta))
        except ModelEvaluationError as exc:
            return -math.inf, exc.reason
        except FloatingPointError:
            return -math.inf, "floating-point error"
        return lp + ll, ""

    def __call__(self, theta: Sequence[float]) -> float:
        """ln posterior; failures are counted in :attr:`failures`."""
        lp, reason = self.evaluate(theta)
        if reason:
            self.failures[reason] += 1
        return lp
