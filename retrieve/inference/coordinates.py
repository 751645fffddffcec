"""The coordinates the ensemble moves in (``[sampler] coordinates``).

* ``"physical"`` (default) — the walkers move in the parameters themselves.
  A proposal beyond a prior bound has ln p = −∞ and is rejected.
* ``"unbounded"`` — every parameter whose prior has a bounded support
  [a, b] (uniform, log-uniform, truncated Gaussian) is mapped to the whole
  real line by the logit transform

      y = ln(x − a) − ln(b − x),     x = a + (b − a) / (1 + e^{−y}),

  and the walkers sample p(x(y)) |dx/dy| with

      ln |dx/dy| = ln(b − a) − softplus(−y) − softplus(y),   softplus(t) = ln(1 + e^t).

  Parameters with an unbounded prior (Gaussian) keep y = x.  This is the
  change of variables that Stan applies to bounded parameters (Carpenter et
  al. 2017, J. Stat. Softw. 76, 1, §"Lower and upper bounded scalar").
  The stationary distribution of x is unchanged; what changes is that
  posteriors piled against a prior bound (an upper limit on a VMR, a knot at
  the opacity tables' ceiling, a gravity the data barely constrain) become
  smooth tails that no proposal can step beyond, so ensemble moves stop
  losing proposals at the walls.

The chain, its ln posterior and every output stay in physical coordinates;
only the walkers' positions and emcee's ln p (which includes ln |dx/dy|)
live in sampler coordinates.  :class:`SamplerSpace` is the emcee ``pool``
that converts between the two around the posterior's evaluation.
"""
from __future__ import annotations

import math

import numpy as np

COORDINATES = ("physical", "unbounded")

# |y| cap: x(±40) is the bound itself to double precision, so larger |y| adds nothing but
# lets a walker drift without limit along a flat tail
_Y_MAX = 40.0


def _softplus(t: np.ndarray) -> np.ndarray:
    """ln(1 + e^t) without overflow."""
    return np.logaddexp(0.0, t)


class Coordinates:
    """Map between physical parameters x and sampler coordinates y.

    Parameters
    ----------
    priors : sequence of Prior
        One per parameter; a prior's ``support`` decides whether it is mapped.
    kind : {"physical", "unbounded"}
    """

    def __init__(self, priors, kind: str = "physical"):
        if kind not in COORDINATES:
            raise ValueError(f"unknown coordinates {kind!r}")
        support = np.array([p.support for p in priors], dtype=float).reshape(-1, 2)
        bounded = np.all(np.isfinite(support), axis=1) if kind == "unbounded" else np.zeros(len(support), bool)
        self.mapped = np.flatnonzero(bounded)
        self._low = support[self.mapped, 0]
        self._width = support[self.mapped, 1] - self._low
        self._log_width = float(np.sum(np.log(self._width))) if self.mapped.size else 0.0

    @property
    def identity(self) -> bool:
        """True when no parameter is mapped (y = x)."""
        return self.mapped.size == 0

    def to_physical(self, y) -> np.ndarray:
        """x(y) for an array of points (…, ndim)."""
        y = np.asarray(y, dtype=float)
        if self.identity:
            return y
        x = y.copy()
        t = y[..., self.mapped]
        x[..., self.mapped] = self._low + self._width / (1.0 + np.exp(-np.clip(t, -_Y_MAX, _Y_MAX)))
        return x

    def to_sampler(self, x) -> np.ndarray:
        """y(x) for an array of points (…, ndim); points on a bound map to ±40."""
        x = np.asarray(x, dtype=float)
        if self.identity:
            return x
        y = x.copy()
        u = (x[..., self.mapped] - self._low) / self._width
        with np.errstate(divide="ignore", invalid="ignore"):
            t = np.log(u) - np.log1p(-u)
        y[..., self.mapped] = np.clip(np.nan_to_num(t, nan=0.0, posinf=_Y_MAX, neginf=-_Y_MAX), -_Y_MAX, _Y_MAX)
        return y

    def log_jacobian(self, y) -> np.ndarray:
        """ln |dx/dy| of each point (…,); zero when no parameter is mapped."""
        y = np.asarray(y, dtype=float)
        if self.identity:
            return np.zeros(y.shape[:-1])
        t = np.clip(y[..., self.mapped], -_Y_MAX, _Y_MAX)
        return self._log_width - np.sum(_softplus(-t) + _softplus(t), axis=-1)


class SamplerSpace:
    """emcee's ``pool`` in sampler coordinates over an evaluation map in physical ones.

    ``map(func, points)`` converts each y to x, evaluates ln p(x) with
    ``evaluator.evaluate`` (serially or on its process pool, counting
    failures) and returns ln p(x) + ln |dx/dy|.  ``func`` (emcee's wrapper of
    the same posterior) is not called.
    """

    def __init__(self, evaluator, coordinates: Coordinates):
        self.evaluator = evaluator
        self.coordinates = coordinates

    def map(self, func, iterable):
        y = np.array([np.asarray(p, dtype=float) for p in iterable])
        lp = self.evaluator.evaluate(self.coordinates.to_physical(y))
        if self.coordinates.identity:
            return list(lp)
        with np.errstate(invalid="ignore"):
            return list(np.where(np.isfinite(lp), lp + self.coordinates.log_jacobian(y), -math.inf))

    def physical_log_prob(self, y, lp_sampler) -> np.ndarray:
        """ln p(x) from the sampler's ln p (which includes ln |dx/dy|)."""
        if self.coordinates.identity:
            return np.asarray(lp_sampler, dtype=float)
        return np.asarray(lp_sampler, dtype=float) - self.coordinates.log_jacobian(y)
