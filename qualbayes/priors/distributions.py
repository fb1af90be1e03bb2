r"""Priors as objects: one small distribution protocol over ``scipy.stats``.

Every prior has ``logpdf``, ``cdf``, ``ppf``, ``rvs``, ``mean``, ``describe()`` (words) and
``to_numpyro()`` (a numpyro distribution, imported only then). Members:

=================  ====================================  =================================
class              density                               used for
=================  ====================================  =================================
``Beta(a, b)``     :math:`p^{a-1}(1-p)^{b-1}/B(a, b)`    a defect rate or failure prob. p
``BetaMixture``    :math:`\sum_k w_k\,\mathrm{Beta}(a_k, b_k)`  a learned (history) prior
``Gamma(a, rate)`` :math:`b^a x^{a-1} e^{-bx}/\Gamma(a)` a constant failure rate
``LogNormal``      :math:`\ln X \sim N(\mu, \sigma^2)`   a Weibull shape, scale or B-life
=================  ====================================  =================================

``variable`` names what the prior is on (``p``, ``rate``, ``shape``, ...). Conversions to
the internal prior types of the questions (``to_rate_prior()`` for plans,
``to_gamma_prior()``, ``to_shape_prior()``, ``to_lot_prior()``) keep the command line and
the Python API on the same objects.

>>> prior = Beta(1, 99)
>>> round(float(prior.cdf(0.01)), 4), prior.describe()
(0.6303, 'p ~ Beta(1, 99)')
>>> round(float(LogNormal.from_range(1.5, 4.0, variable="shape").ppf(0.975)), 6)
4.0
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Protocol, runtime_checkable

import numpy as np
from scipy import special, stats

Z975 = float(special.ndtri(0.975))


@runtime_checkable
class Prior(Protocol):
    """What every prior offers."""

    variable: str

    def logpdf(self, x): ...
    def cdf(self, x): ...
    def ppf(self, q): ...
    def rvs(self, size=None, random_state=None): ...
    def mean(self) -> float: ...
    def describe(self) -> str: ...
    def to_numpyro(self): ...


class _Frozen:
    """logpdf, cdf, ppf, rvs and mean from the scipy.stats frozen distribution."""

    def frozen(self):
        raise NotImplementedError

    def logpdf(self, x):
        return self.frozen().logpdf(x)

    def pdf(self, x):
        return self.frozen().pdf(x)

    def cdf(self, x):
        return self.frozen().cdf(x)

    def ppf(self, q):
        return self.frozen().ppf(q)

    def rvs(self, size=None, random_state=None):
        return self.frozen().rvs(size=size, random_state=random_state)

    def mean(self) -> float:
        return float(self.frozen().mean())

    def head(self) -> str:
        """The label as a prefix of a description ("stated: "), or nothing."""
        return f"{self.label}: " if self.label else ""

    def interval(self, coverage: float = 0.95) -> tuple[float, float]:
        lo, hi = self.frozen().interval(coverage)
        return float(lo), float(hi)


def _positive(value, name: str) -> float:
    from qualbayes.parameters import positive  # noqa: PLC0415

    return positive(value, name)


@dataclass(frozen=True)
class Beta(_Frozen):
    """p ~ Beta(a, b)."""

    a: float
    b: float
    variable: str = "p"
    label: str = ""
    source: object = field(default=None, compare=False, repr=False)  # e.g. the statements

    def __post_init__(self):
        _positive(self.a, "a")
        _positive(self.b, "b")

    def frozen(self):
        return stats.beta(self.a, self.b)

    def describe(self) -> str:
        return f"{self.head()}{self.variable} ~ Beta({self.a:.6g}, {self.b:.6g})"

    def to_numpyro(self):
        import numpyro.distributions as dist  # noqa: PLC0415

        return dist.Beta(self.a, self.b)

    def to_lot_prior(self):
        from qualbayes.models.lot_prior import BetaPrior  # noqa: PLC0415

        return BetaPrior(self.a, self.b, self.label or f"beta:{self.a:g},{self.b:g}")

    def to_rate_prior(self):
        from qualbayes.planning.rate_prior import RatePrior  # noqa: PLC0415

        return RatePrior.beta(self.a, self.b, self.describe())


@dataclass(frozen=True, eq=False)
class BetaMixture:
    r"""p ~ :math:`\sum_k w_k \mathrm{Beta}(a_k, b_k)` (equal weights by default), e.g. the
    next-lot predictive of a lot history mixed over posterior draws."""

    a: np.ndarray
    b: np.ndarray
    weights: np.ndarray | None = None
    variable: str = "p"
    label: str = "mixture of Beta"

    def _w(self) -> np.ndarray:
        a = np.asarray(self.a, float)
        if self.weights is None:
            return np.full(a.size, 1.0 / a.size)
        w = np.asarray(self.weights, float)
        return w / w.sum()

    def logpdf(self, x):
        x = np.asarray(x, float)[..., None]
        comp = stats.beta.logpdf(x, np.asarray(self.a, float), np.asarray(self.b, float))
        return special.logsumexp(comp, b=self._w(), axis=-1)

    def cdf(self, x):
        x = np.asarray(x, float)[..., None]
        return np.sum(self._w() * special.betainc(self.a, self.b, x), axis=-1)

    def ppf(self, q):
        from scipy import optimize  # noqa: PLC0415

        def one(qq: float) -> float:
            if qq <= 0.0:
                return 0.0
            if qq >= 1.0:
                return 1.0
            qs = special.betaincinv(self.a, self.b, qq)
            lo, hi = float(np.min(qs)), float(np.max(qs))
            if hi <= lo * (1 + 1e-12):
                return lo
            return optimize.brentq(lambda p: float(self.cdf(p)) - qq, lo, hi, xtol=1e-15,
                                   rtol=1e-12)

        q = np.asarray(q, float)
        out = np.vectorize(one, otypes=[float])(q)
        return float(out) if out.ndim == 0 else out

    def rvs(self, size=None, random_state=None):
        rng = np.random.default_rng(random_state)
        n = 1 if size is None else int(np.prod(size))
        k = rng.choice(np.asarray(self.a).size, size=n, p=self._w())
        out = rng.beta(np.asarray(self.a, float)[k], np.asarray(self.b, float)[k])
        return float(out[0]) if size is None else out.reshape(size)

    def mean(self) -> float:
        a, b = np.asarray(self.a, float), np.asarray(self.b, float)
        return float(np.sum(self._w() * a / (a + b)))

    def describe(self) -> str:
        return (f"{self.variable} ~ {self.label}: {np.asarray(self.a).size} components, "
                f"mean {self.mean():.4g}")

    def to_numpyro(self):
        import jax.numpy as jnp  # noqa: PLC0415
        import numpyro.distributions as dist  # noqa: PLC0415

        return dist.MixtureSameFamily(dist.Categorical(probs=jnp.asarray(self._w())),
                                      dist.Beta(jnp.asarray(self.a), jnp.asarray(self.b)))

    def to_rate_prior(self):
        from qualbayes.planning.rate_prior import RatePrior  # noqa: PLC0415

        if self.weights is not None:
            raise ValueError("plans take equal-weight mixtures (posterior draws)")
        return RatePrior.mixture(np.asarray(self.a, float), np.asarray(self.b, float),
                                 self.describe())


@dataclass(frozen=True)
class Gamma(_Frozen):
    """rate ~ Gamma(shape a, rate b): as if a failures had been seen in b unit-time."""

    a: float
    rate: float
    variable: str = "rate"
    label: str = ""
    source: object = field(default=None, compare=False, repr=False)

    def __post_init__(self):
        _positive(self.a, "a")
        _positive(self.rate, "rate")

    def frozen(self):
        return stats.gamma(self.a, scale=1.0 / self.rate)

    def describe(self) -> str:
        return f"{self.head()}{self.variable} ~ Gamma(shape {self.a:.6g}, rate {self.rate:.6g})"

    def to_numpyro(self):
        import numpyro.distributions as dist  # noqa: PLC0415

        return dist.Gamma(self.a, self.rate)

    def to_gamma_prior(self):
        from qualbayes.planning.mtbf import GammaPrior  # noqa: PLC0415

        return GammaPrior(self.a, self.rate)


@dataclass(frozen=True)
class LogNormal(_Frozen):
    """ln X ~ Normal(mu, sigma^2), for a positive quantity (a Weibull shape, scale, B-life)."""

    mu: float
    sigma: float
    variable: str = "X"
    label: str = ""
    source: object = field(default=None, compare=False, repr=False)

    def __post_init__(self):
        if not math.isfinite(self.mu):
            from qualbayes.errors import ParameterError  # noqa: PLC0415

            raise ParameterError("mu", self.mu, "must be a finite number")
        _positive(self.sigma, "sigma")

    @classmethod
    def from_range(cls, low: float, high: float, coverage: float = 0.95,
                   variable: str = "X") -> LogNormal:
        """The lognormal with (low, high) as its central ``coverage`` interval."""
        low, high = _positive(low, "low"), _positive(high, "high")
        if not low < high:
            from qualbayes.errors import ParameterError  # noqa: PLC0415

            raise ParameterError("high", high, f"must exceed low = {low:g}")
        z = float(special.ndtri(0.5 + coverage / 2.0))
        mu = 0.5 * (math.log(low) + math.log(high))
        return cls(mu, (math.log(high) - math.log(low)) / (2.0 * z), variable)

    def frozen(self):
        return stats.lognorm(self.sigma, scale=math.exp(self.mu))

    def describe(self) -> str:
        lo, hi = self.interval()
        return (f"{self.head()}ln({self.variable}) ~ Normal({self.mu:.6g}, {self.sigma:.6g}^2) "
                f"(central 95%: {lo:.4g} to {hi:.4g})")

    def to_numpyro(self):
        import numpyro.distributions as dist  # noqa: PLC0415

        return dist.LogNormal(self.mu, self.sigma)

    def to_shape_prior(self):
        """The shape prior of a life plan (ln shape ~ Normal)."""
        from qualbayes.planning.weibull import ShapePrior  # noqa: PLC0415

        return ShapePrior(self.mu, self.sigma)

    def to_life_prior(self, base=None):
        """The life model's prior with this lognormal on the Weibull shape."""
        from dataclasses import replace  # noqa: PLC0415

        from qualbayes.models.weibull import LifePrior  # noqa: PLC0415

        return replace(base or LifePrior(), shape=(self.mu, self.sigma), shape_given=True,
                       shape_range=self.interval())


def from_elicited(e) -> Beta | Gamma | LogNormal:
    """The prior object of an :class:`~qualbayes.priors.elicit.Elicited` result."""
    p = e.params
    if e.family == "beta":
        return Beta(p["a"], p["b"], e.variable, "stated", e)
    if e.family == "gamma":
        return Gamma(p["a"], p["rate"], e.variable, "stated", e)
    return LogNormal(p["mu"], p["sigma"], e.variable, "stated", e)
