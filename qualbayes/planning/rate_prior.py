r"""Priors on a failure (or defect) probability :math:`p = 1 - R`, as used by the plans.

A prior is an equal-weight mixture of Beta distributions,

.. math:: p \sim \frac1D \sum_{d=1}^{D} \mathrm{Beta}(a_d, b_d),

which covers a single Beta (D = 1) and the predictive for the next lot of a part learned from
its lot history (one component per posterior draw of :math:`(\mu, \kappa)`, with
:math:`a_d = \mu_d\kappa_d`, :math:`b_d = (1-\mu_d)\kappa_d`).

After x failures among n units the posterior is again such a mixture, with components
:math:`\mathrm{Beta}(a_d + x, b_d + n - x)` and weights
:math:`w_d \propto B(a_d + x, b_d + n - x) / B(a_d, b_d)` (each component's marginal
likelihood). For D = 1 this is plain conjugacy (Hamada, Wilson, Reese & Martz, Bayesian
Reliability, 2008, ch. 2).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import optimize, special

from qualbayes.planning.inputs import positive

#: Below this effective number of mixture components a reweighted answer is not trusted.
MIN_COMPONENT_ESS = 200.0


@dataclass(frozen=True, eq=False)
class RatePrior:
    """p ~ equal-weight mixture of Beta(a_d, b_d); ``label`` says what it is to people."""

    a: np.ndarray
    b: np.ndarray
    label: str

    @classmethod
    def beta(cls, a: float, b: float, label: str | None = None) -> RatePrior:
        """p ~ Beta(a, b)."""
        a = positive(a, "prior parameter a")
        b = positive(b, "prior parameter b")
        return cls(np.array([a]), np.array([b]), label or f"p ~ Beta({a:g}, {b:g})")

    @classmethod
    def on_reliability(cls, a: float, b: float, label: str | None = None) -> RatePrior:
        """R ~ Beta(a, b), i.e. p = 1 - R ~ Beta(b, a)."""
        a = positive(a, "reliability prior parameter a")
        b = positive(b, "reliability prior parameter b")
        return cls(np.array([b]), np.array([a]), label or f"R ~ Beta({a:g}, {b:g})")

    @classmethod
    def mixture(cls, a, b, label: str) -> RatePrior:
        a = np.asarray(a, dtype=float).reshape(-1)
        b = np.asarray(b, dtype=float).reshape(-1)
        if a.shape != b.shape or a.size == 0 or not (np.all(a > 0) and np.all(b > 0)):
            raise ValueError("mixture components need positive a and b of equal length")
        return cls(a, b, label)

    @property
    def components(self) -> int:
        return int(self.a.size)

    # ------------------------------------------------------------------ posterior
    def weights(self, n: int = 0, x: int = 0) -> np.ndarray:
        """Normalised posterior component weights after x failures in n units."""
        if self.components == 1:
            return np.ones(1)
        logw = special.betaln(self.a + x, self.b + (n - x)) - special.betaln(self.a, self.b)
        w = np.exp(logw - logw.max())
        return w / w.sum()

    def component_ess(self, n: int = 0, x: int = 0) -> float:
        """Effective number of components after x failures in n (D for the prior itself)."""
        w = self.weights(n, x)
        return float(1.0 / np.sum(w**2))

    def prob_at_most(self, p_star: float, n: int = 0, x: int = 0) -> float:
        """P(p <= p_star | x failures among n units)."""
        cdf = special.betainc(self.a + x, self.b + (n - x), p_star)
        return float(np.dot(self.weights(n, x), cdf))

    def quantile(self, q: float, n: int = 0, x: int = 0) -> float:
        """The q-quantile of p after x failures among n units."""
        a, b, w = self.a + x, self.b + (n - x), self.weights(n, x)
        if self.components == 1:
            return float(special.betaincinv(a[0], b[0], q))
        q_each = special.betaincinv(a, b, q)
        lo, hi = float(q_each.min()), float(q_each.max())
        if hi - lo < 1e-15:
            return lo
        return float(optimize.brentq(
            lambda p: float(np.dot(w, special.betainc(a, b, p))) - q, lo, hi,
            xtol=1e-14, rtol=1e-12))

    def mean(self, n: int = 0, x: int = 0) -> float:
        a, b = self.a + x, self.b + (n - x)
        return float(np.dot(self.weights(n, x), a / (a + b)))

    # ------------------------------------------------------------------ simulation
    def sample(self, rng: np.random.Generator, size: int) -> np.ndarray:
        """Draws of p from the prior (a component chosen at random, then its Beta)."""
        d = rng.integers(0, self.components, size=size)
        return rng.beta(self.a[d], self.b[d])
