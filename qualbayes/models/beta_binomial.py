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

The samplers use :func:`log_kernel`: the same value without the binomial coefficient
:math:`\log\binom{n}{x}` (a constant of the data), through one ``gammaln`` of all six
arguments at once, so that the compiler expands the log-gamma function and, in the
gradient, the digamma function once instead of six and nine times.
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


def log_kernel(x, n, a, b):
    r"""The parameter-dependent part of log BB(x | n, a, b), in jax:

    .. math:: \log\Gamma(x + a) - \log\Gamma(a) + \log\Gamma(n - x + b) - \log\Gamma(b)
              - \log\Gamma(n + a + b) + \log\Gamma(a + b)

    that is :func:`log_pmf` minus :math:`\log\binom{n}{x}`, which does not depend on a and b:
    a model's log density then differs by a constant of the data, and NUTS, which sees only
    differences and gradients, samples the same posterior. ``x``, ``n``: shape (..., terms);
    ``a``, ``b``: one value per row, shape (..., 1) (or scalars). The six log-gammas are
    one ``gammaln`` of the concatenated arguments: each compiled program holds one
    expansion of the function and of its derivative, not six (measured: the lots history
    sampler's ``steps`` program compiled in about 1.7 s instead of 2.5 s; docs/speed.md).
    The values are those of six separate calls (elementwise, the same function).

    >>> import jax
    >>> import numpy as np
    >>> from scipy import stats, special
    >>> with jax.enable_x64(True):
    ...     v = log_kernel(np.array([[2.0, 0.0]]), np.array([[125.0, 80.0]]), 0.5, 49.5)
    >>> ref = stats.betabinom.logpmf([2, 0], [125, 80], 0.5, 49.5) - np.log(
    ...     special.comb([125, 80], [2, 0]))
    >>> bool(np.allclose(np.asarray(v)[0], ref, rtol=0, atol=1e-10))
    True
    """
    import jax.numpy as jnp  # noqa: PLC0415
    from jax.scipy.special import gammaln  # noqa: PLC0415

    x, n = jnp.asarray(x), jnp.asarray(n)
    row = (*x.shape[:-1], 1)
    a = jnp.broadcast_to(jnp.asarray(a, x.dtype), row)
    b = jnp.broadcast_to(jnp.asarray(b, x.dtype), row)
    t = x.shape[-1]
    v = gammaln(jnp.concatenate([x + a, n - x + b, n + a + b, a, b, a + b], axis=-1))
    up_a, up_b, up_ab = v[..., :t], v[..., t:2 * t], v[..., 2 * t:3 * t]
    lo_a, lo_b, lo_ab = v[..., 3 * t:3 * t + 1], v[..., 3 * t + 1:3 * t + 2], v[..., 3 * t + 2:]
    return up_a - lo_a + up_b - lo_b - up_ab + lo_ab
