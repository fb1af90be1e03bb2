r"""The beta-binomial log probability as a short jax expression (quick to compile).

.. math:: \log \mathrm{BB}(x \mid n, a, b) = \log\binom{n}{x}
          + \log\Gamma(x + a) - \log\Gamma(a) + \log\Gamma(n - x + b) - \log\Gamma(b)
          - \log\Gamma(n + a + b) + \log\Gamma(a + b)

written with ``gammaln`` only. numpyro's ``BetaBinomial.log_prob`` computes the same value
through ``betaln``, whose accurate large-argument branches make the gradient's program about
ten times longer; inside NUTS that program is compiled on every first-ever run, and it is
most of the lots history model's compile time (measured: bench/bench_first_run.py
``--model-compile``). For the concentrations the lots model allows (a + b up to 1e8) the
short form agrees with ``scipy.stats.betabinom.logpmf`` as closely as numpyro's does
(tests/test_first_run.py). Works on numpy and jax arrays alike (``xp``).

>>> import numpy as np
>>> from scipy import stats
>>> v = log_pmf(np.array([2.0]), np.array([125.0]), 0.5, 49.5, xp=np)
>>> bool(abs(v[0] - stats.betabinom.logpmf(2, 125, 0.5, 49.5)) < 1e-10)
True
"""

from __future__ import annotations


def gammaln_for(xp):
    """The log-gamma of the array module ``xp`` (jax's for jax.numpy, else scipy's)."""
    if xp.__name__.startswith("jax"):
        from jax.scipy.special import gammaln  # noqa: PLC0415
    else:
        from scipy.special import gammaln  # noqa: PLC0415
    return gammaln


def log_pmf(x, n, a, b, *, xp=None):
    """log BB(x | n, a, b), elementwise (x, n as floats; a, b > 0)."""
    if xp is None:
        import jax.numpy as xp  # noqa: PLC0415
    lg = gammaln_for(xp)
    return (lg(n + 1.0) - lg(x + 1.0) - lg(n - x + 1.0)
            + lg(x + a) - lg(a) + lg(n - x + b) - lg(b) - lg(n + a + b) + lg(a + b))
