"""Prior distributions for free parameters, with a registry keyed on the TOML name.

Every prior offers

* ``log_pdf(x)``   – normalised log density (``-inf`` outside the support);
* ``transform(u)`` – the inverse CDF, mapping the unit interval onto the prior
  (for nested samplers, which draw from the unit hypercube);
* ``sample(rng, size)`` – draws from a :class:`numpy.random.Generator`;
* ``bounds``       – a finite interval holding (almost) all prior mass, used to
  bound the global optimiser and to clip the initial walker ball;
* ``support``      – the interval where the density is non-zero (infinite ends
  for unbounded priors), which ``[sampler] coordinates = "unbounded"`` maps
  onto the real line (:mod:`retrieve.inference.coordinates`).

A new prior is a subclass of :class:`Prior` decorated with
:func:`register_prior`; the TOML table ``{ prior = "<name>", ... }`` then
builds it through :func:`prior_from_mapping` (see DEVELOPERS.md, "How to add a
prior").
"""
from __future__ import annotations

import inspect
import math
from collections.abc import Mapping

import numpy as np
from scipy import special, stats

from ..config_keys import check_keys, expect_type
from ..errors import ConfigError

#: name in TOML -> Prior subclass
PRIORS: dict[str, type["Prior"]] = {}

# Fraction of an unbounded prior's mass left outside ``bounds`` on each side.
_TAIL = 1e-6


def register_prior(cls):
    """Class decorator adding ``cls`` to :data:`PRIORS` under ``cls.name``."""
    if not getattr(cls, "name", None):
        raise TypeError(f"{cls.__name__} needs a class attribute 'name'")
    PRIORS[cls.name] = cls
    return cls


class Prior:
    """Base class of one-dimensional priors.

    Subclasses set ``name`` (the TOML string) and ``keys`` (the TOML keys
    besides ``prior``, all required), and implement :meth:`log_pdf`,
    :meth:`transform` and :attr:`bounds`.  :meth:`sample` defaults to
    ``transform(rng.uniform())``.
    """

    name: str = ""
    keys: tuple[str, ...] = ()

    def log_pdf(self, x):
        raise NotImplementedError

    def transform(self, u):
        raise NotImplementedError

    @property
    def bounds(self) -> tuple[float, float]:
        raise NotImplementedError

    @property
    def support(self) -> tuple[float, float]:
        """(low, high) outside which the density is zero; (−inf, inf) unless a subclass is bounded."""
        return -math.inf, math.inf

    def sample(self, rng: np.random.Generator, size=None):
        """Draw from the prior with ``rng`` (inverse-CDF sampling)."""
        return self.transform(rng.uniform(size=size))

    def contains(self, x) -> bool:
        """True where the density is non-zero."""
        return bool(np.isfinite(self.log_pdf(x)))

    def to_dict(self) -> dict:
        """The TOML table that rebuilds this prior."""
        return {"prior": self.name, **{k: getattr(self, k) for k in self.keys}}

    def __repr__(self):
        args = ", ".join(f"{k}={getattr(self, k)!r}" for k in self.keys)
        return f"{type(self).__name__}({args})"

    def __eq__(self, other):
        return type(self) is type(other) and self.to_dict() == other.to_dict()

    def __hash__(self):
        return hash(tuple(sorted(self.to_dict().items())))

    @classmethod
    def from_mapping(cls, mapping: Mapping, where: str) -> "Prior":
        """Build from a TOML table; raises one-line :class:`ConfigError`."""
        check_keys(mapping, ("prior",) + cls.keys, where, required=cls.keys)
        values = {k: float(expect_type(mapping[k], (int, float), where, k)) for k in cls.keys}
        for k, v in values.items():
            if not math.isfinite(v):
                raise ConfigError(f"{where}: key {k!r} must be finite, got {v}")
        # a constructor that accepts ``where`` uses it to name the key in its own messages
        if "where" in inspect.signature(cls).parameters:
            values["where"] = where
        return cls(**values)


def _check_interval(low: float, high: float, what: str):
    if not high > low:
        raise ConfigError(f"{what}: inverted or empty bounds low={low} >= high={high}; swap them")


@register_prior
class Uniform(Prior):
    """Uniform density on ``[low, high]``."""

    name = "uniform"
    keys = ("low", "high")

    def __init__(self, low: float, high: float, where: str = "uniform prior"):
        _check_interval(low, high, where)
        self.low, self.high = float(low), float(high)
        self._log_norm = -math.log(self.high - self.low)

    def log_pdf(self, x):
        x = np.asarray(x, dtype=float)
        inside = (x >= self.low) & (x <= self.high)
        return np.where(inside, self._log_norm, -np.inf)[()]

    def transform(self, u):
        return self.low + (self.high - self.low) * np.asarray(u, dtype=float)

    @property
    def bounds(self):
        return self.low, self.high

    @property
    def support(self):
        return self.low, self.high


@register_prior
class LogUniform(Prior):
    """Density ∝ 1/x on ``[low, high]`` with ``0 < low < high`` (bounds in the parameter's own units)."""

    name = "log-uniform"
    keys = ("low", "high")

    def __init__(self, low: float, high: float, where: str = "log-uniform prior"):
        _check_interval(low, high, where)
        if low <= 0:
            raise ConfigError(f"{where}: log-uniform prior needs low > 0, got low={low}")
        self.low, self.high = float(low), float(high)
        self._log_ratio = math.log(self.high / self.low)

    def log_pdf(self, x):
        x = np.asarray(x, dtype=float)
        inside = (x >= self.low) & (x <= self.high)
        with np.errstate(divide="ignore", invalid="ignore"):
            val = -np.log(np.where(inside, x, 1.0)) - math.log(self._log_ratio)
        return np.where(inside, val, -np.inf)[()]

    def transform(self, u):
        return self.low * np.exp(self._log_ratio * np.asarray(u, dtype=float))

    @property
    def bounds(self):
        return self.low, self.high

    @property
    def support(self):
        return self.low, self.high


@register_prior
class Gaussian(Prior):
    """Normal density with ``mean`` and ``sigma`` (unbounded)."""

    name = "gaussian"
    keys = ("mean", "sigma")

    def __init__(self, mean: float, sigma: float, where: str = "gaussian prior"):
        if not sigma > 0:
            raise ConfigError(f"{where}: sigma must be > 0, got {sigma}")
        self.mean, self.sigma = float(mean), float(sigma)
        self._log_norm = -0.5 * math.log(2 * math.pi) - math.log(self.sigma)

    def log_pdf(self, x):
        z = (np.asarray(x, dtype=float) - self.mean) / self.sigma
        return (self._log_norm - 0.5 * z * z)[()]

    def transform(self, u):
        return self.mean + self.sigma * special.ndtri(np.asarray(u, dtype=float))

    @property
    def bounds(self):
        z = special.ndtri(1 - _TAIL)
        return self.mean - z * self.sigma, self.mean + z * self.sigma


@register_prior
class TruncatedGaussian(Prior):
    """Normal density with ``mean``, ``sigma`` restricted to ``[low, high]`` and renormalised."""

    name = "truncated-gaussian"
    keys = ("mean", "sigma", "low", "high")

    def __init__(self, mean: float, sigma: float, low: float, high: float,
                 where: str = "truncated-gaussian prior"):
        _check_interval(low, high, where)
        if not sigma > 0:
            raise ConfigError(f"{where}: sigma must be > 0, got {sigma}")
        self.mean, self.sigma, self.low, self.high = map(float, (mean, sigma, low, high))
        a, b = (self.low - self.mean) / self.sigma, (self.high - self.mean) / self.sigma
        # scipy.stats.truncnorm handles the far-tail normalisation stably.
        self._dist = stats.truncnorm(a, b, loc=self.mean, scale=self.sigma)
        if not np.isfinite(self._dist.logpdf(0.5 * (self.low + self.high))):
            raise ConfigError(f"{where}: [low, high] lies too far in the Gaussian tail to normalise")

    def log_pdf(self, x):
        x = np.asarray(x, dtype=float)
        inside = (x >= self.low) & (x <= self.high)
        return np.where(inside, self._dist.logpdf(np.clip(x, self.low, self.high)), -np.inf)[()]

    def transform(self, u):
        return self._dist.ppf(np.asarray(u, dtype=float))

    @property
    def bounds(self):
        return self.low, self.high

    @property
    def support(self):
        return self.low, self.high

    def __getstate__(self):
        return {k: getattr(self, k) for k in self.keys}

    def __setstate__(self, state):
        self.__init__(**state)


def prior_from_mapping(mapping: Mapping, where: str) -> Prior:
    """Build the prior named by ``mapping["prior"]``.

    Parameters
    ----------
    mapping : Mapping
        A TOML table such as ``{prior = "uniform", low = 3.0, high = 5.5}``.
    where : str
        Location for error messages, e.g. ``"fit.toml [parameters] log_g"``.
    """
    if "prior" not in mapping:
        raise ConfigError(f"{where}: missing required key 'prior' (one of {', '.join(PRIORS)})")
    name = expect_type(mapping["prior"], str, where, "prior")
    if name not in PRIORS:
        from ..config_keys import suggest
        raise ConfigError(f"{where}: unknown prior {name!r}{suggest(name, PRIORS)}; "
                          f"choose one of {', '.join(PRIORS)}")
    return PRIORS[name].from_mapping(mapping, where)
