"""Classification of an abundance (log VMR) posterior: constrained, upper limit, lower limit, unconstrained.

Rule (ours; documented here and in the detections table meta).  Let [a, b] be
the prior's range (the support of a bounded prior, else its central
1 − 2·10⁻⁶ interval) and w = b − a.  The posterior samples are histogrammed in
20 equal bins over [a, b]; ``edge_lo`` (``edge_hi``) is the mean density of
the lowest (highest) 10 % of the range (two bins) relative to the highest
bin.  An edge is *open* when that ratio is at least ``edge_fraction`` (0.2):
the posterior has not fallen off before reaching the prior edge there (a
flat lower tail).

* **constrained**: both edges closed and the posterior is narrower than the
  prior (standard deviation below ``width_fraction`` = 0.5 of the prior's):
  reported with its median and 16–84 % interval (and 2.5–97.5 %);
* **upper limit**: lower edge open, upper edge closed: reported with the
  95 % quantile (one-sided 95 % upper limit);
* **lower limit**: upper edge open, lower edge closed (the posterior presses
  against the top of the prior): reported with the 5 % quantile;
* **unconstrained**: anything else (both edges open, or a posterior as wide
  as the prior): the data say little beyond the prior.
"""
from __future__ import annotations

import dataclasses
import math

import numpy as np

CLASSES = ("constrained", "upper limit", "lower limit", "unconstrained")
N_BINS = 20
EDGE_BINS = 2
EDGE_FRACTION = 0.2
WIDTH_FRACTION = 0.5
RULE = ("abundance_class: posterior of log_vmr histogrammed in 20 bins over the prior range; an edge "
        "(lowest/highest 10% of the range) is open if its mean density is >= 0.2 of the peak bin; "
        "constrained = both edges closed and posterior std < 0.5 prior std (interval = 16-84%); "
        "upper limit = lower edge open, upper closed (upper_limit_95 = 95% quantile); lower limit = upper "
        "edge open, lower closed (5% quantile); unconstrained = otherwise")


@dataclasses.dataclass
class AbundanceClass:
    """Result of :func:`classify_abundance`.

    Attributes
    ----------
    label : str
        One of :data:`CLASSES`.
    median, lo, hi : float
        Median and 16 / 84 % quantiles of the samples.
    lo95, hi95 : float
        2.5 / 97.5 % quantiles.
    upper_limit_95, lower_limit_95 : float
        95 % one-sided limits (95 % and 5 % quantiles), set for the limit classes, NaN otherwise.
    edge_lo, edge_hi : float
        Relative edge densities used by the rule.
    width_ratio : float
        Posterior standard deviation over the prior's.
    """

    label: str
    median: float
    lo: float
    hi: float
    lo95: float
    hi95: float
    upper_limit_95: float
    lower_limit_95: float
    edge_lo: float
    edge_hi: float
    width_ratio: float


def _prior_range_and_std(prior, bounds, rng):
    if prior is not None:
        lo, hi = prior.bounds
        draws = prior.sample(rng, 20000)
        return float(lo), float(hi), float(np.std(draws))
    lo, hi = map(float, bounds)
    return lo, hi, (hi - lo) / math.sqrt(12.0)      # std of a uniform prior


def classify_abundance(samples, prior=None, bounds=None, edge_fraction: float = EDGE_FRACTION,
                       width_fraction: float = WIDTH_FRACTION, seed: int = 0) -> AbundanceClass:
    """Classify a log-VMR posterior (rule in the module docstring).

    Parameters
    ----------
    samples : array_like
        Posterior draws of ``log_vmr_<X>``.
    prior : retrieve.inference.priors.Prior, optional
        The parameter's prior (its ``bounds`` and spread are used).
    bounds : (float, float), optional
        Prior range if ``prior`` is not given (taken as uniform).
    edge_fraction, width_fraction : float
        Thresholds of the rule.
    seed : int
        Seed of the prior draws used for the prior's standard deviation.

    Returns
    -------
    AbundanceClass
    """
    x = np.asarray(samples, dtype=float)
    x = x[np.isfinite(x)]
    if x.size < 10:
        raise ValueError("classify_abundance needs at least 10 finite samples")
    if prior is None and bounds is None:
        raise ValueError("give the prior or its bounds")
    a, b, prior_std = _prior_range_and_std(prior, bounds, np.random.default_rng(seed))
    counts, _ = np.histogram(np.clip(x, a, b), bins=N_BINS, range=(a, b))
    peak = counts.max()
    edge_lo = float(counts[:EDGE_BINS].mean() / peak)
    edge_hi = float(counts[-EDGE_BINS:].mean() / peak)
    width_ratio = float(np.std(x) / prior_std)
    open_lo, open_hi = edge_lo >= edge_fraction, edge_hi >= edge_fraction
    q = np.quantile(x, [0.025, 0.05, 0.16, 0.5, 0.84, 0.95, 0.975])
    if not open_lo and not open_hi and width_ratio < width_fraction:
        label = "constrained"
    elif open_lo and not open_hi:
        label = "upper limit"
    elif open_hi and not open_lo:
        label = "lower limit"
    else:
        label = "unconstrained"
    return AbundanceClass(label=label, median=float(q[3]), lo=float(q[2]), hi=float(q[4]),
                          lo95=float(q[0]), hi95=float(q[6]),
                          upper_limit_95=float(q[5]) if label == "upper limit" else math.nan,
                          lower_limit_95=float(q[1]) if label == "lower limit" else math.nan,
                          edge_lo=edge_lo, edge_hi=edge_hi, width_ratio=width_ratio)
