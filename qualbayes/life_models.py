"""The three life distributions side by side: per-observation log-likelihood (for LOO),
R(t) and B-lives from draws, maximum-likelihood fits, and the NUTS fits of the lognormal and
exponential models (the Weibull fit is :mod:`qualbayes.models.life`).

Draws of a family are a dict of (chain, draw) arrays: Weibull ``log_shape``, ``log_scale``;
lognormal ``mu``, ``log_sigma``; exponential ``u`` = log(t_ref / mean life) with ``t_ref``
alongside. numpy and scipy only, except :func:`fit_alternatives` (the sampler path).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import optimize, special

from qualbayes.models import exponential as expo
from qualbayes.models import lognormal as logn
from qualbayes.models.censored import Observations, arrays, pointwise
from qualbayes.models.weibull import (
    FLAT,
    group_stats,
    log1mexp_from_log,
    log_expm1,
    reported_mode,
)

FAMILIES = ("weibull", "lognormal", "exponential")
LABELS = {"weibull": "Weibull", "lognormal": "lognormal", "exponential": "exponential"}
SETTLE_SHAPE = 50.0  # a maximum-likelihood shape above this has not settled (runs off)


# ----------------------------------------------------------------------------- draws

def flat(draws: dict) -> dict:
    """Every (chain, draw) array flattened, scalars kept."""
    return {k: (np.asarray(v).reshape(-1) if np.ndim(v) >= 2 else v) for k, v in draws.items()}


def log_reliability(family: str, draws: dict, t) -> np.ndarray:
    """log R(t) for each draw (leading axes of the draws) and time (trailing axis of t)."""
    t = np.asarray(t, float)
    if family == "weibull":
        b, le = draws["log_shape"][..., None], draws["log_scale"][..., None]
        return -np.exp(np.exp(b) * (np.log(t) - le))
    if family == "lognormal":
        mu, s = draws["mu"][..., None], draws["log_sigma"][..., None]
        return special.log_ndtr(-(np.log(t) - mu) / np.exp(s))
    if family == "exponential":
        return -np.exp(draws["u"][..., None]) * t / draws["t_ref"]
    raise ValueError(f"unknown family {family!r}")


def reliability(family: str, draws: dict, t: float) -> np.ndarray:
    """R(t) at one time for each draw (the draws' shape)."""
    return np.exp(log_reliability(family, draws, np.array([t]))[..., 0])


def b_life(family: str, draws: dict, q: float) -> np.ndarray:
    """The time by which a fraction q has failed, for each draw."""
    if family == "weibull":
        return np.exp(draws["log_scale"] + np.log(-math.log1p(-q)) / np.exp(draws["log_shape"]))
    if family == "lognormal":
        return np.exp(draws["mu"] + np.exp(draws["log_sigma"]) * special.ndtri(q))
    return expo.mean_life(draws["u"], draws["t_ref"]) * -math.log1p(-q)


def weibull_pointwise(log_shape, log_scale, obs: Observations) -> np.ndarray:
    """Weibull log-likelihood of every distinct observation, (draws, n)."""
    beta, le = np.exp(log_shape)[..., None], log_scale[..., None]

    def log_h(t):
        return beta * (np.log(t) - le)

    def log_f(t):
        return np.log(beta) - np.log(t) + log_h(t) - np.exp(log_h(t))

    def log_int(a, b):
        lh_a = log_h(a)
        return -np.exp(lh_a) + log1mexp_from_log(lh_a + log_expm1(beta * np.log(b / a)))

    return pointwise(log_f, lambda t: -np.exp(log_h(t)), log_int,
                     lambda t: log1mexp_from_log(log_h(t)), obs)


def log_lik_pointwise(family: str, draws: dict, obs: Observations) -> np.ndarray:
    """Per-observation log-likelihood (draws, n distinct observations); the counts are
    ``obs.weights()``."""
    if family == "weibull":
        return weibull_pointwise(draws["log_shape"], draws["log_scale"], obs)
    data = arrays(obs)
    keep = [data["e_w_exact"] > 0, data["r_w_right"] > 0, data["i_w_int"] > 0,
            data["l_w_left"] > 0]
    if family == "lognormal":
        t = logn.terms(np.asarray(draws["mu"]), np.asarray(draws["log_sigma"]), data)
    else:
        t = expo.terms(np.asarray(draws["u"]), math.log(obs.t_ref), data)
    parts = [t[k][..., m] for k, m in zip(("exact", "right", "interval", "left"), keep,
                                           strict=True)]
    return np.concatenate(parts, axis=-1)


# ----------------------------------------------------------------------------- optimisation

def laplace(nlp, x0: np.ndarray) -> tuple[np.ndarray, np.ndarray, bool]:
    """Minimum of ``nlp`` (BFGS from x0) and the inverse of its finite-difference Hessian."""
    res = optimize.minimize(nlp, x0, method="BFGS", options={"gtol": 1e-8, "maxiter": 500})
    x = res.x
    k = x.size
    h = 1e-4
    hess = np.zeros((k, k))
    for i in range(k):
        for j in range(i, k):
            ei, ej = np.eye(k)[i] * h, np.eye(k)[j] * h
            v = (nlp(x + ei + ej) - nlp(x + ei - ej) - nlp(x - ei + ej) + nlp(x - ei - ej))
            hess[i, j] = hess[j, i] = v / (4 * h * h)
    ok = bool(np.isfinite(res.fun) and res.fun < 1e299)
    try:
        cov = np.linalg.inv(hess)
        np.linalg.cholesky(cov)
    except np.linalg.LinAlgError:
        cov, ok = np.eye(k) * 0.25, False
    return x, cov, ok


def _guarded(f):
    def nlp(x):
        with np.errstate(all="ignore"):
            v = f(x)
        return -float(v) if np.isfinite(v) else 1e300
    return nlp


def _log_start(obs: Observations) -> tuple[float, float]:
    """A start for (mu, log sigma): the log times of the failures (midpoints of intervals)."""
    t = np.concatenate([np.repeat(obs.exact, obs.w_exact.astype(int)),
                        np.repeat(0.5 * (obs.int_a + obs.int_b), obs.w_int.astype(int)),
                        np.repeat(obs.left, obs.w_left.astype(int))])
    if t.size == 0:
        return math.log(obs.t_ref) + 1.0, 0.0
    sd = float(np.std(np.log(t))) if t.size > 1 else 0.5
    return float(np.mean(np.log(t))), math.log(max(sd, 0.05))


def lognormal_mode(obs: Observations, prior: logn.LognormalPrior | None):
    """(x, cov, ok) at the mode of the posterior (or of the likelihood, prior None) on
    (mu, log sigma)."""
    data, ltr = arrays(obs), math.log(obs.t_ref)

    def f(x):
        ll = logn.log_likelihood(np.array(x[0]), np.array(x[1]), data)
        return ll if prior is None else ll + logn.log_prior(x[0], x[1], ltr, prior)

    return laplace(_guarded(f), np.array(_log_start(obs)))


def lognormal_sampling_mode(obs: Observations, prior: logn.LognormalPrior):
    """(x, cov, ok) at the posterior mode on the sampled scale (v, s) of
    :func:`qualbayes.models.lognormal.lognormal_life_model`."""
    data, ltr = arrays(obs), math.log(obs.t_ref)

    def f(x):
        mu = ltr - math.exp(x[1]) * x[0]
        return (logn.log_likelihood(np.array(mu), np.array(x[1]), data)
                + logn.log_prior(mu, x[1], ltr, prior) + x[1])

    mu0, s0 = _log_start(obs)
    return laplace(_guarded(f), np.array([(ltr - mu0) / math.exp(s0), s0]))


def exponential_mode(obs: Observations, flat_prior: bool = False):
    """(x, cov, ok) at the mode of the posterior (or of the likelihood) on u."""
    data, ltr = arrays(obs), math.log(obs.t_ref)

    def f(x):
        ll = expo.log_likelihood(np.array(x[0]), ltr, data)
        return ll if flat_prior else ll + expo.log_prior(x[0])

    x0 = math.log(max(obs.failures, 1) / max(
        (obs.exact @ obs.w_exact + obs.right @ obs.w_right + obs.int_a @ obs.w_int)
        / obs.t_ref, 1e-12))
    return laplace(_guarded(f), np.array([x0]))


def max_likelihood(obs: Observations, arrays_by_kind: dict, mission: float) -> dict:
    """The censored maximum-likelihood fit of each family and its R(mission), or the code of
    why there is none (``reason``: ``zero-failures``, ``shape-unsettled`` when the shape runs
    off above ``SETTLE_SHAPE``, ``sigma-unsettled``)."""
    out = {}
    if obs.failures == 0:
        return {f: {"fitted": False, "reason": "zero-failures"} for f in FAMILIES}
    try:
        with np.errstate(all="ignore"):
            shape, scale = reported_mode(group_stats(**arrays_by_kind), FLAT)
    except (OverflowError, ValueError, np.linalg.LinAlgError):
        shape, scale = math.inf, math.nan
    if shape <= SETTLE_SHAPE:
        d = {"log_shape": np.array(math.log(shape)), "log_scale": np.array(math.log(scale))}
        out["weibull"] = {"shape": shape, "scale": scale} | _ml_answers("weibull", d, mission)
    else:
        out["weibull"] = {"fitted": False, "reason": "shape-unsettled"}  # > SETTLE_SHAPE
    x, _, ok = lognormal_mode(obs, None)
    d = {"mu": np.array(x[0]), "log_sigma": np.array(x[1])}
    out["lognormal"] = ({"median_life": math.exp(x[0]), "sigma": math.exp(x[1])}
                        | _ml_answers("lognormal", d, mission))
    if not ok or math.exp(x[1]) < 1e-3:
        out["lognormal"] = {"fitted": False, "reason": "sigma-unsettled"}
    x, _, _ = exponential_mode(obs, flat_prior=True)
    d = {"u": np.array(x[0]), "t_ref": obs.t_ref}
    out["exponential"] = ({"mean_life": float(expo.mean_life(x[0], obs.t_ref))}
                          | _ml_answers("exponential", d, mission))
    return out


def _ml_answers(family: str, d: dict, mission: float) -> dict:
    return {"fitted": True, "b10": float(b_life(family, d, 0.10)),
            "reliability_at_mission": float(reliability(family, d, mission))}


# ----------------------------------------------------------------------------- NUTS fits

def fit_alternatives(obs_list: list[Observations], names: list[str], mission: float,
                     settings, lognormal_prior: logn.LognormalPrior) -> dict:
    """Lognormal (NUTS) and exponential (exact Gamma draws when conjugate, else NUTS) fits of
    every group: {family: {group: (draws as (chain, draw) arrays, gate dict)}}. As for the
    Weibull, a joint fit that fails its gate is redone group by group, so that one difficult
    group does not take the others' answers with it."""
    from qualbayes.models.life import pad_groups  # noqa: F401, PLC0415 - configures jax

    rng = np.random.default_rng(settings.seed)
    out: dict = {"lognormal": _each_if_failed(
        lambda o, n: _fit_lognormal(o, n, mission, settings, lognormal_prior, rng),
        obs_list, names)}
    shape = (settings.num_chains, settings.num_samples)
    out["exponential"] = {}
    for o, g in zip(obs_list, names, strict=True):
        if o.conjugate:
            total = float(o.exact @ o.w_exact + o.right @ o.w_right)
            u = expo.conjugate_draws(o.failures, total, o.t_ref, shape[0] * shape[1], rng)
            out["exponential"][g] = ({"u": u.reshape(shape), "t_ref": o.t_ref},
                                     {"passed": True, "method": "exact Gamma draws "
                                      "(conjugate)", "reasons": []})
    rest = [(o, g) for o, g in zip(obs_list, names, strict=True) if not o.conjugate]
    if rest:
        out["exponential"].update(_each_if_failed(
            lambda o, n: _fit_exponential(o, n, settings, rng),
            [o for o, _ in rest], [g for _, g in rest]))
    return out


def _each_if_failed(fit, obs_list, names) -> dict:
    result, passed = fit(obs_list, names)
    if not passed and len(names) > 1:
        for o, g in zip(obs_list, names, strict=True):
            result.update(fit([o], [g])[0])
    return result


def _fit_lognormal(obs_list, names, mission, settings, prior, rng):
    from functools import partial  # noqa: PLC0415

    import jax.numpy as jnp  # noqa: PLC0415

    from qualbayes.inference.run import run_nuts  # noqa: PLC0415
    from qualbayes.models.censored import pad  # noqa: PLC0415

    modes = [lognormal_sampling_mode(o, prior) for o in obs_list]
    center = np.array([m[0] for m in modes])
    chol = np.stack([np.linalg.cholesky(m[1]) for m in modes])
    init = {"z": jnp.asarray(rng.uniform(-1, 1, (settings.num_chains, len(obs_list), 2)))}

    def gate_on(draws):
        r = reliability("lognormal", draws, mission)
        return {f"{k}[{g}]": v[:, :, j] for j, g in enumerate(names)
                for k, v in (("mu", draws["mu"]), ("log_sigma", draws["log_sigma"]),
                             ("R_mission", r))}

    args = ({k: jnp.asarray(v) for k, v in pad(obs_list).items()},
            jnp.asarray(np.log([o.t_ref for o in obs_list])), jnp.asarray(center),
            jnp.asarray(chol))
    fit = run_nuts(partial(logn.lognormal_life_model, prior=prior), args, settings,
                   gate_on=gate_on, init_params=init)
    return {g: ({"mu": fit.draws["mu"][:, :, j], "log_sigma": fit.draws["log_sigma"][:, :, j]},
                fit.gate.select(g).to_dict()) for j, g in enumerate(names)}, fit.gate.passed


def _fit_exponential(obs_list, names, settings, rng):
    import jax.numpy as jnp  # noqa: PLC0415

    from qualbayes.inference.run import run_nuts  # noqa: PLC0415
    from qualbayes.models.censored import pad  # noqa: PLC0415

    modes = [exponential_mode(o) for o in obs_list]
    center = jnp.asarray([m[0][0] for m in modes])
    sd = jnp.asarray([math.sqrt(m[1][0, 0]) for m in modes])
    init = {"z": jnp.asarray(rng.uniform(-1, 1, (settings.num_chains, len(obs_list))))}

    def gate_on(draws):
        return {f"u[{g}]": draws["u"][:, :, j] for j, g in enumerate(names)}

    args = ({k: jnp.asarray(v) for k, v in pad(obs_list).items()},
            jnp.asarray(np.log([o.t_ref for o in obs_list])), center, sd)
    fit = run_nuts(expo.exponential_life_model, args, settings, gate_on=gate_on,
                   init_params=init)
    return {g: ({"u": fit.draws["u"][:, :, j], "t_ref": obs_list[j].t_ref},
                fit.gate.select(g).to_dict()) for j, g in enumerate(names)}, fit.gate.passed
