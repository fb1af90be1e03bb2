r"""The hyperprior of the lot-history model, stated as an engineering quantity (numpy only).

Lots of one group share a mean defect rate :math:`\mu` and a concentration :math:`\kappa`;
a lot's rate is :math:`p \sim \mathrm{Beta}(\mu\kappa, (1-\mu)\kappa)`. The lot-to-lot
spread is stated as

.. math::

    \tau = \frac{1}{\sqrt{\kappa\,\mu(1-\mu)}} = \sqrt{\frac{1}{a} + \frac{1}{b}},

which for rare defects is the coefficient of variation of the lot rates,
:math:`\mathrm{CV}^2 = (1-\mu)/(\mu(\kappa+1)) \approx \tau^2` (and of the rarer outcome in
general). Unlike :math:`\kappa` or :math:`\phi = (\kappa+1)^{-1/2}` it means the same at
10 ppm and at 5%, and it grows without bound as the lots become "either near 0 or near 1"
(:math:`a, b < 1` means :math:`\tau > \sqrt2`). The default hyperprior is

.. math::

    \mu \sim \mathrm{Beta}(1, 1), \qquad
    \tau \mid \mu \sim \mathrm{HalfNormal}(S)\ \text{truncated to}\ \tau \ge \tau_{lo}(\mu)
    = (\kappa_{max} \mu(1-\mu))^{-1/2},

with S the stated spread (default ``DEFAULT_CV_SCALE``, chosen from the operating
characteristics): 95% prior probability that the lot rates vary with a CV below 1.96 S.
The mode at tau = 0 means "the lots are alike until the data show otherwise": with clean
lots the answer moves towards complete pooling, not towards "every clean lot is perfect".
The truncation is the float64 cap :math:`\kappa \le \kappa_{max} = 10^8`.

>>> prior = HistoryPrior()
>>> round(float(prior.log_tau_density(0.5, 0.001)), 3)  # tau = 0.5 (CV about 0.5), S = 0.5
-0.028
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

KAPPA_MAX = 1e8  # lots more alike than this are the binomial limit for any real sample size
PHI_MIN = 1.0 / np.sqrt(KAPPA_MAX + 1.0)  # the same cap as phi = (kappa + 1)^(-1/2), ~1e-4
DEFAULT_CV_SCALE = 0.5  # chosen from the operating characteristics: docs/calibration.md
_LOG_HN = 0.5 * np.log(2.0 / np.pi)


def spread_floor(mu):
    """tau at kappa = KAPPA_MAX: tau_lo = 1 / sqrt(KAPPA_MAX mu (1 - mu))."""
    mu = np.asarray(mu, float)
    return 1.0 / np.sqrt(KAPPA_MAX * (mu * (1.0 - mu)))


def kappa_of(mu, tau):
    """kappa = 1 / (mu (1 - mu) tau^2)."""
    return 1.0 / ((mu * (1.0 - mu)) * np.asarray(tau, float) ** 2)


@dataclass(frozen=True)
class HistoryPrior:
    """Hyperprior of the history model: mu ~ Beta(1, 1), spread tau ~ HalfNormal(cv_scale)
    truncated to tau >= tau_lo(mu)."""

    cv_scale: float = DEFAULT_CV_SCALE

    def __post_init__(self):
        s = self.cv_scale
        if not (isinstance(s, (int, float)) and np.isfinite(s) and 0.01 <= s <= 10):
            from qualbayes.errors import ParameterError  # noqa: PLC0415

            raise ParameterError(f"cv_scale {s!r}: the stated lot-to-lot spread must be a "
                                 "coefficient of variation between 0.01 and 10")

    def describe(self) -> str:
        s = self.cv_scale
        return (f"history (lot-to-lot spread {s:g}): lots of a group share a mean rate "
                f"mu ~ Beta(1, 1); their spread, about the coefficient of variation of the lot "
                f"rates, tau ~ HalfNormal({s:g}): 95% prior probability that the lots' rates "
                f"vary with a CV below {1.959964 * s:.2g}, with the data free to show more")

    def log_tau_density(self, tau, mu):
        """log p(tau | mu) on (tau_lo(mu), inf); numpy, broadcasting."""
        s = self.cv_scale
        lo = spread_floor(mu)
        log_z = np.log(2.0) + special.log_ndtr(-lo / s)
        return _LOG_HN - np.log(s) - 0.5 * (np.asarray(tau, float) / s) ** 2 - log_z

    def sample(self, size: int, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
        """(mu, kappa) draws from the hyperprior (for simulation and the implied lot rate)."""
        mu = rng.uniform(0.0, 1.0, size)
        s = self.cv_scale
        lo = spread_floor(mu)
        tail = special.ndtr(-lo / s)  # P(Z > lo/s): inverse cdf of the truncated half-normal
        tau = -s * special.ndtri(rng.uniform(size=size) * tail)
        return mu, kappa_of(mu, np.maximum(tau, lo))

    def implied_lot_rate(self, draws: int = 200_000, seed: int = 1) -> dict:
        """The implied prior on one lot's rate (prior predictive), by direct simulation:
        quantiles and tail probabilities, for the docs and the run record."""
        rng = np.random.default_rng(seed)
        mu, kappa = self.sample(draws, rng)
        p = rng.beta(np.maximum(mu * kappa, 1e-300), np.maximum((1 - mu) * kappa, 1e-300))
        q = np.quantile(p, [0.05, 0.25, 0.5, 0.75, 0.95])
        return {"quantiles": dict(zip(("5%", "25%", "50%", "75%", "95%"),
                                      (float(v) for v in q), strict=True)),
                "P(p >= 10%)": float(np.mean(p >= 0.1)),
                "P(p >= 50%)": float(np.mean(p >= 0.5)),
                "P(p >= 99%)": float(np.mean(p >= 0.99)), "draws": draws}


@dataclass(frozen=True)
class PhiUniformPrior:
    """The earlier hyperprior, phi = (kappa + 1)^(-1/2) ~ Uniform(PHI_MIN, 1)
    (``--prior history-phi-uniform``). Kept only under its explicit name, for comparison:
    with clean lots it puts most mass on kappa < 1 and calls every clean lot nearly perfect
    (docs/lots.md). In tau: phi = (1 + 1/(m tau^2))^(-1/2), m = mu (1 - mu)."""

    cv_scale: None = None

    def describe(self) -> str:
        return ("history-phi-uniform (not recommended): mu ~ Beta(1, 1), phi = 1/sqrt(kappa+1) "
                "~ Uniform(1e-4, 1); known to make clean lots look far better than the data "
                "show (docs/lots.md)")

    def log_tau_density(self, tau, mu):
        m = np.asarray(mu, float) * (1.0 - np.asarray(mu, float))
        tau = np.asarray(tau, float)
        # |d phi / d tau| with phi^2 = m tau^2 / (m tau^2 + 1)
        return (0.5 * np.log(m) - 1.5 * np.log1p(m * tau**2) - np.log1p(-PHI_MIN))

    def sample(self, size: int, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
        mu = rng.uniform(0.0, 1.0, size)
        phi = rng.uniform(PHI_MIN, 1.0, size)
        return mu, 1.0 / phi**2 - 1.0

    implied_lot_rate = HistoryPrior.implied_lot_rate
