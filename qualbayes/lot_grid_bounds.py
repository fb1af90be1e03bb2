r"""Quantiles of mixtures of Betas over a group's grid nodes, with few incomplete-beta calls.

The bounds of a lot's rate are quantiles of :math:`F(p) = \sum_i w_i I_p(\alpha_i,
\beta_i)` (:math:`I_p` the regularised incomplete beta function, one node i per grid
point). :func:`qualbayes.lot_grid_answers.mixture_ppf` finds them by safeguarded Newton
steps, each step one :math:`I_p` per node; :func:`mixture_quantiles` finds the same
quantiles (to the same :math:`|F - q| \le 10^{-10}`) with fewer and cheaper evaluations:

* **Derivatives for free.** On the logit scale :math:`t = \mathrm{logit}\,p` every node's
  density is :math:`e_i = p^{\alpha_i}(1-p)^{\beta_i}/B(\alpha_i, \beta_i)`, and with
  :math:`g_i = \alpha_i - (\alpha_i + \beta_i)p` and :math:`v_i = (\alpha_i + \beta_i)p(1-p)`,
  :math:`F' = \sum w_i e_i`, :math:`F'' = \sum w_i e_i g_i`, :math:`F''' = \sum w_i e_i
  (g_i^2 - v_i)`: Halley's step (cubic convergence) instead of Newton's.
* **The last evaluation predicted.** When the step s is small, :math:`F(t - s) - q` is
  the cubic Taylor polynomial in s plus a remainder; the step is the polynomial's root
  and it is accepted without a further evaluation when the remainder's estimate
  :math:`\sum_i w_i e_i |s| (c_i|s|)^3 e^{c_i|s|} / 24`, :math:`c_i = |g_i| + \sqrt{v_i} + 1`
  (each node's own rate of change of its log density), is below the tolerance.
* **Nodes that are 0 or 1 skipped.** :math:`I_p(\alpha, \beta) = \frac{e}{\alpha}
  {}_2F_1(\alpha+\beta, 1; \alpha+1; p)` (the hypergeometric form of the incomplete beta,
  Abramowitz and Stegun 26.5.23; the equation number is from memory, the bounds below are
  checked against scipy in the tests), whose series has term ratios at most
  :math:`r = \max((\alpha+\beta)p/(\alpha+1), p)`, so :math:`I_p \le e/(\alpha(1 - r))`
  when r < 1, and the same with :math:`(\alpha, p)` and :math:`(\beta, 1-p)` exchanged
  for :math:`1 - I_p`. A node whose bound is below ``GATE`` (1e-17) is counted as exactly
  0 or 1: the narrow nodes of a very homogeneous history (kappa up to 1e8), far from the
  quantile, cost no incomplete beta at all.

The same numbers as ``mixture_ppf`` to about 1e-9 relative (tested on every kind of node,
tests/test_lot_grid_bounds.py).

>>> import numpy as np
>>> from scipy import stats
>>> a, b = np.array([[2.0], [30.0]]), np.array([[200.0], [2000.0]])
>>> w = np.array([0.3, 0.7])
>>> p = mixture_quantiles((0.95,), a, b, w)[0, 0]
>>> F = 0.3 * stats.beta.cdf(p, 2, 200) + 0.7 * stats.beta.cdf(p, 30, 2000)
>>> bool(abs(F - 0.95) < 1e-9)
True
"""

from __future__ import annotations

import numpy as np
from scipy import special

GATE = 1e-17  # a node whose I_p or 1 - I_p is provably below this counts as 0 or 1
TOL = 1e-10  # |F - q| at the answer (as mixture_ppf)
_MAX_NEWTON = 60  # steps before bisection only (as mixture_ppf)


def tail_bounds(alpha, beta, log_p, log_q, e):
    """Upper bounds of I_p(alpha, beta) and of 1 - I_p(alpha, beta) from the hypergeometric
    series (module docstring); inf where the bound does not apply. ``e`` is
    p^alpha (1-p)^beta / B(alpha, beta), ``log_p``, ``log_q`` the logarithms of p, 1 - p."""
    p, q = np.exp(log_p), np.exp(log_q)
    s = alpha + beta
    r0 = np.maximum(s * p / (alpha + 1.0), p)
    r1 = np.maximum(s * q / (beta + 1.0), q)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        low = np.where(r0 < 1.0, e / (alpha * (1.0 - r0)), np.inf)
        up = np.where(r1 < 1.0, e / (beta * (1.0 - r1)), np.inf)
    return low, up


def mixture_cdf(alpha, beta, log_p, log_q, e):
    """Per node I_p(alpha, beta) (nodes x columns), exact 0 or 1 where :func:`tail_bounds`
    proves it below GATE, scipy's betainc elsewhere."""
    low, up = tail_bounds(alpha, beta, log_p, log_q, e)
    vals = (up <= GATE).astype(float)
    act = (low > GATE) & (up > GATE)
    if act.any():
        i, j = np.nonzero(act)
        vals[i, j] = special.betainc(alpha[i, j], beta[i, j], np.exp(log_p[0, j]))
    return vals


def _start(qv, alpha, beta, w, col):
    """The moment-matched Beta's quantiles (as mixture_ppf starts)."""
    m = alpha / (alpha + beta)
    mean = w @ m
    var = np.maximum(w @ (m * (1 - m) / (alpha + beta + 1)) + w @ m**2 - mean**2, 1e-300)
    common = np.maximum(mean * (1 - mean) / var - 1.0, 1e-6)
    start = special.betaincinv((mean * common)[col], ((1 - mean) * common)[col], qv)
    return special.logit(np.clip(start, 1e-300, 1 - 1e-16))


def _step(f, f1, f2, f3):
    """Halley's step, then one Newton step on the cubic Taylor polynomial of F - q in s
    (F(t - s) - q = f - f1 s + f2 s^2/2 - f3 s^3/6 + ...); returns s and the polynomial's
    value at s."""
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        s = f / f1
        den = 1.0 - s * f2 / (2.0 * f1)
        s = np.where((den > 0.5) & (den < 2.0), s / den, s)
        poly = f - f1 * s + f2 * s**2 / 2 - f3 * s**3 / 6
        slope = f1 - f2 * s + f3 * s**2 / 2
        s2 = s + poly / slope
        poly2 = f - f1 * s2 + f2 * s2**2 / 2 - f3 * s2**3 / 6
        better = np.isfinite(poly2) & (np.abs(poly2) < np.abs(poly))
    return np.where(better, s2, s), np.where(better, poly2, poly)


def mixture_quantiles(qs, alpha, beta, w, *, tol: float = TOL) -> np.ndarray:
    """The ``qs`` quantiles of :math:`\\sum_i w_i \\mathrm{Beta}(\\alpha_{ik}, \\beta_{ik})`
    for each column k (alpha, beta of shape (nodes, K)): an array (len(qs), K). Safeguarded
    Halley steps on the logit scale from the moment-matched Beta's quantile (bisection when a
    step leaves the bracket or after 60 steps), to |F - q| <= tol, evaluated or predicted
    (module docstring)."""
    alpha, beta = np.atleast_2d(alpha), np.atleast_2d(beta)
    w = np.asarray(w, float)
    n_q, k_cols = len(qs), alpha.shape[1]
    col = np.tile(np.arange(k_cols), n_q)
    qv = np.repeat(np.asarray(qs, float), k_cols)
    t = _start(qv, alpha, beta, w, col)
    lo, hi = np.full(t.shape, -745.0), np.full(t.shape, 37.0)
    log_norm = special.betaln(alpha, beta)
    open_ = np.ones(t.shape, bool)
    for step in range(200):
        k = np.flatnonzero(open_)
        if not k.size:
            break
        c = col[k]
        al, be = alpha[:, c], beta[:, c]
        tk = t[k]
        log_p = -np.logaddexp(0.0, -tk)[None, :]
        log_q = -np.logaddexp(0.0, tk)[None, :]
        with np.errstate(under="ignore", over="ignore"):
            e = np.exp(al * log_p + be * log_q - log_norm[:, c])
        f = w @ mixture_cdf(al, be, log_p, log_q, e) - qv[k]
        p = np.exp(log_p)
        g = al - (al + be) * p
        v = (al + be) * (p * np.exp(log_q))
        f1, f2, f3 = w @ e, w @ (e * g), w @ (e * (g * g - v))
        hi[k] = np.where(f > 0, tk, hi[k])
        lo[k] = np.where(f > 0, lo[k], tk)
        s, poly = _step(f, f1, f2, f3)
        nxt = tk - s
        bad = ~np.isfinite(nxt) | (nxt <= lo[k]) | (nxt >= hi[k]) | (step >= _MAX_NEWTON)
        done = (np.abs(f) <= tol) | (hi[k] - lo[k] <= 1e-12 * np.maximum(1.0, np.abs(tk)))
        small = ~bad & ~done & (np.abs(s) <= 1e-2)
        pred = np.zeros(k.size, bool)
        if small.any():
            j = np.flatnonzero(small)
            cs = (np.abs(g[:, j]) + np.sqrt(v[:, j]) + 1.0) * np.abs(s[j])
            with np.errstate(over="ignore"):
                rest = w @ (e[:, j] * cs**3 * np.exp(np.minimum(cs, 700.0))) \
                    * np.abs(s[j]) / 24.0
            pred[j] = np.abs(poly[j]) + rest <= tol
        nxt = np.where(bad, 0.5 * (lo[k] + hi[k]), nxt)
        t[k] = np.where(done, tk, nxt)
        open_[k[done | pred]] = False
    return special.expit(t).reshape(n_q, k_cols)
