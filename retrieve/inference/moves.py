"""Proposal mixtures for the emcee ensemble (``[sampler] moves``).

* ``"stretch"`` — the affine-invariant stretch move (Goodman & Weare 2010),
  emcee's default.
* ``"differential-evolution"`` — 80 % DEMove (ter Braak 2006) + 20 %
  DESnookerMove (ter Braak & Vrugt 2008), the mixture suggested in the
  emcee documentation ("Using different moves").
* ``"pilot-mixture"`` — 50 % DEMove + 10 % DESnookerMove + 40 %
  :class:`MixtureIndependenceMove`, an independence Metropolis–Hastings
  proposal (Tierney 1994, Ann. Statist. 22, 1701, §2.3.3) drawn from a
  Gaussian mixture fitted to a pilot run's posterior sample
  (:mod:`retrieve.inference.mixture`).  The mixture is frozen before the
  chain starts, so the chain is an ordinary Metropolis–Hastings chain with
  the target posterior as its stationary distribution; the pilot only makes
  it mix faster.  Independence draws jump along ridges and between modes
  that the local moves need hundreds of steps to cross.  The fractions are
  common practice, no source: enough local moves to explore where the
  mixture fits badly, enough independence moves to decorrelate quickly.
"""
from __future__ import annotations

import emcee

from .mixture import GaussianMixture

MOVES = ("stretch", "differential-evolution", "pilot-mixture")

#: moves that need a proposal mixture (from a pilot run)
NEEDS_MIXTURE = ("pilot-mixture",)


class MixtureIndependenceMove(emcee.moves.MHMove):
    """Independence proposal x' ~ q (a fixed :class:`GaussianMixture`) for every walker at once.

    The Metropolis–Hastings ratio of an independence proposal is
    p(x′) q(x) / (p(x) q(x′)); emcee adds the returned log factor
    ln q(x) − ln q(x′) to ln p(x′) − ln p(x).  Draws outside the prior
    support have ln p = −∞ and are rejected without a model evaluation.
    """

    def __init__(self, mixture: GaussianMixture):
        self.mixture = mixture
        super().__init__(self._propose, ndim=mixture.ndim)

    def _propose(self, x0, random):
        x1 = self.mixture.sample(len(x0), random)
        return x1, self.mixture.log_pdf(x0) - self.mixture.log_pdf(x1)


def make_moves(name: str, mixture: GaussianMixture | None = None):
    """The emcee ``moves`` argument for ``[sampler] moves`` (``mixture`` for "pilot-mixture")."""
    if name == "stretch":
        return None
    if name == "differential-evolution":
        return [(emcee.moves.DEMove(), 0.8), (emcee.moves.DESnookerMove(), 0.2)]
    if name == "pilot-mixture":
        if mixture is None:
            raise ValueError("moves 'pilot-mixture' needs a proposal mixture from a pilot run")
        return [(emcee.moves.DEMove(), 0.5), (emcee.moves.DESnookerMove(), 0.1),
                (MixtureIndependenceMove(mixture), 0.4)]
    raise ValueError(f"unknown moves {name!r}")
