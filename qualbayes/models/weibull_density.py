"""The Weibull log-likelihood with censoring and the log prior density on (b, u) =
(log shape, log H(t_ref)), for numpy and jax alike (the array module is ``xp``); the model
in symbols is in :mod:`qualbayes.models.weibull`."""

from __future__ import annotations

import math

import numpy as np

from qualbayes.models.weibull_prior import LifePrior
from qualbayes.models.weibull_stats import GroupStats, exposure_sum_binned

LOG_2PI = math.log(2.0 * math.pi)
LN2 = math.log(2.0)

def log1mexp_from_log(lx, xp=np):
    """log(1 - exp(-x)) from lx = log x, for any x > 0, finite in value and gradient."""
    x = xp.exp(lx)
    tiny = lx < -10.0
    mid = (~tiny) & (x < LN2)
    series = lx - 0.5 * x + x * x / 24.0
    x_mid = xp.where(mid, x, 0.5)
    x_big = xp.where(tiny | mid, 1.0, x)
    return xp.where(tiny, series,
                    xp.where(mid, xp.log(-xp.expm1(-x_mid)), xp.log1p(-xp.exp(-x_big))))


def log_expm1(y, xp=np):
    """log(exp(y) - 1) for y > 0, stable for small and large y."""
    return y + xp.log(-xp.expm1(-y))


def log_likelihood(b, u, data: dict, xp=np):
    r"""Log-likelihood at shape exp(b) and log cumulative hazard u at t_ref.

    ``data`` holds arrays whose last axis runs over (distinct) observations with their
    counts as weights; padding has weight 0 (keys: n_f, sum_log_tf, sum_d_f, d_exp, w_exp,
    d_ia, lr_int, w_int, d_left, w_left). With keys ``bin_c``, ``bin_a`` and ``beta_cap``
    the sum over exact failures and suspensions comes from :func:`binned_moments` instead,
    and the shape is capped at 2 * beta_cap. ``b`` and ``u`` broadcast against the leading
    axes.
    """
    beta = xp.exp(b)
    bb, uu = beta[..., None], u[..., None]
    # exact failures and suspensions: the sum of H(t) (d <= 0, so no overflow)
    if "bin_c" in data:
        expo = exposure_sum_binned(beta, data["bin_c"], data["bin_a"], xp)
    else:
        expo = xp.sum(data["w_exp"] * xp.exp(bb * data["d_exp"]), axis=-1)
    ll = data["n_f"] * (b + u) - data["sum_log_tf"] + beta * data["sum_d_f"] - xp.exp(u) * expo
    if data["d_ia"].shape[-1]:
        lh_a = bb * data["d_ia"] + uu
        lgap = lh_a + log_expm1(bb * data["lr_int"], xp)
        term = -xp.exp(lh_a) + log1mexp_from_log(lgap, xp)
        ll = ll + xp.sum(data["w_int"] * term, axis=-1)
    if data["d_left"].shape[-1]:
        term = log1mexp_from_log(bb * data["d_left"] + uu, xp)
        ll = ll + xp.sum(data["w_left"] * term, axis=-1)
    if "bin_c" in data:
        ll = xp.where(beta <= 2.0 * data["beta_cap"], ll, -xp.inf)
    return ll


def _normal_logpdf(x, m, sd, xp=np):
    z = (x - m) / sd
    return -0.5 * z * z - xp.log(sd) - 0.5 * LOG_2PI


def log_prior(b, u, prior: LifePrior, log_tref, xp=np):
    """Log prior density on (b, u) = (log shape, log H(t_ref)), Jacobians included."""
    out = 0.0 * b
    if prior.shape is not None:
        out = out + _normal_logpdf(b, prior.shape[0], prior.shape[1], xp)
    beta = xp.exp(b)
    kind = prior.scale_kind
    if kind == "hazard":
        out = out + u
    elif kind == "blife":
        q, m, sd = prior.scale_args
        log_bq = log_tref + (math.log(-math.log1p(-q)) - u) / beta
        out = out + _normal_logpdf(log_bq, m, sd, xp) - b
    elif kind == "reliability":
        t, m, sd = prior.scale_args
        out = out + _normal_logpdf(beta * (math.log(t) - log_tref) + u, m, sd, xp)
    elif kind == "flat":
        out = out - b
    elif kind == "jeffreys":
        pass  # uniform on (b, u)
    else:
        raise ValueError(f"unknown scale prior {kind!r}")
    for weight, earlier, _ in prior.earlier:
        out = out + weight * earlier_log_likelihood(b, u, log_tref, earlier, xp)
    return out


def earlier_log_likelihood(b, u, log_tref, earlier: GroupStats, xp=np):
    """Log-likelihood of earlier data at the current (b, u) = (log shape, log H(t_ref)):
    the earlier data's own reference time gives u0 = u + beta (log t_ref0 - log t_ref)."""
    u0 = u + xp.exp(b) * (earlier.log_tref - log_tref)
    return log_likelihood(b, u0, data_arrays(earlier), xp)


def log_scale(b, u, log_tref):
    """log eta from (b, u)."""
    return log_tref - u / np.exp(b)


def data_arrays(st: GroupStats) -> dict[str, np.ndarray]:
    """Unpadded arrays of one group for :func:`log_likelihood` (numpy, exact sums)."""
    return {
        "n_f": np.float64(st.n_f), "sum_log_tf": np.float64(st.sum_log_tf),
        "sum_d_f": np.float64(st.sum_d_f),
        "d_exp": st.d_exposed, "w_exp": st.w_exposed,
        "d_ia": st.d_int_a, "lr_int": st.log_ratio_int, "w_int": st.w_int,
        "d_left": st.d_left, "w_left": st.w_left,
    }


def log_posterior(b, u, st: GroupStats, prior: LifePrior, data: dict | None = None):
    """Unnormalised log posterior density of one group on (b, u), in numpy (for the mode
    and quadrature)."""
    data = data_arrays(st) if data is None else data
    b = np.asarray(b, float)
    u = np.asarray(u, float)
    return log_likelihood(b, u, data) + log_prior(b, u, prior, st.log_tref)
