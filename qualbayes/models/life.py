r"""Weibull life with censoring, fitted with NUTS (imports jax: the sampler path only).

For every group g independently, with :math:`b_g = \log\beta_g` and
:math:`u_g = \log H_g(t_{\mathrm{ref},g}) = \beta_g(\log t_{\mathrm{ref},g} - \log\eta_g)`:

.. math::

    p(b_g, u_g \mid \text{data}_g) \propto p(b_g)\, p(u_g \mid b_g)
        \prod_{\text{units}} \ell_i(b_g, u_g)

with the exact likelihood contributions and priors of :mod:`qualbayes.models.weibull`.

Sampling. Each group's posterior mode :math:`m_g` and Laplace covariance
:math:`\Sigma_g = L_g L_g^\top` are found first (scipy, no jax); NUTS then samples
:math:`z_g` with :math:`(b_g, u_g) = m_g + L_g z_g`. This affine change of variables has a
constant Jacobian, so it leaves the posterior unchanged; it makes the target close to a
standard normal (short trajectories, short warm-up) and removes the strong correlation of
shape and scale that censored data produce. All groups share one vectorised model (the unit
axis is padded with weight-0 units to a power of two, so compiled code is reused).
"""

from __future__ import annotations

from functools import partial

import jax.numpy as jnp  # noqa: E402
import numpy as np
import numpyro  # noqa: E402
import numpyro.distributions as dist  # noqa: E402

from qualbayes.inference.run import Fit, SamplerSettings, jax_scope, run_nuts
from qualbayes.models.weibull import (
    SHAPE_CAP_SD,
    TAYLOR_ORDER,
    GroupStats,
    LifePrior,
    Mode,
    binned_moments,
    log_likelihood,
    log_prior,
)


def whitened_sites(log_tref, center, chol):
    """(b, u) = mode + L z per group, z the sampled site; records log shape and log scale.
    Shared by this model and the prior-sensitivity model."""
    groups = center.shape[0]
    z = numpyro.sample("z", dist.ImproperUniform(dist.constraints.real, (), (groups, 2)))
    b = center[:, 0] + chol[:, 0, 0] * z[:, 0]
    u = center[:, 1] + chol[:, 1, 0] * z[:, 0] + chol[:, 1, 1] * z[:, 1]
    numpyro.deterministic("log_shape", b)
    numpyro.deterministic("log_scale", log_tref - u / jnp.exp(b))
    return b, u


def weibull_life_model(data, log_tref, center, chol, *, prior: LifePrior):
    """``data``: dict of (groups, units) arrays (see ``log_likelihood``); ``center`` (G, 2),
    ``chol`` (G, 2, 2) the Laplace mode and Cholesky factor of each group."""
    b, u = whitened_sites(log_tref, center, chol)
    lp = log_prior(b, u, prior, log_tref, jnp) + log_likelihood(b, u, data, jnp)
    numpyro.factor("log_posterior", jnp.sum(lp))


def bucket(k: int, least: int = 8) -> int:
    """Padded length: 0 stays 0, else the next of 8, 10, 12, 14, 16, 20, 24, 28, 32, ...
    (four steps per power of two: at most 25% padding, few distinct compiled shapes)."""
    if k == 0:
        return 0
    k = max(k, least)
    top = 1 << (k - 1).bit_length()
    step = max(top // 8, 1)
    return -(-k // step) * step


#: Use the binned sums when a group has more distinct exposure times than this.
BINNED_FROM = 2048


def pad_groups(stats: list[GroupStats], modes: list[Mode] | None = None) -> tuple[dict, np.ndarray]:
    """Stack the groups' arrays into (groups, units) arrays padded with weight-0 entries.

    With ``modes`` given and a large group, the exact-failure and suspension sums use
    binned Taylor moments (:func:`qualbayes.models.weibull.binned_moments`) with the shape
    capped SHAPE_CAP_SD Laplace standard deviations above the mode.
    """
    g = len(stats)

    def stack(key_d, key_w, key_x=None, fill_x=1.0):
        width = bucket(max(getattr(st, key_d).size for st in stats))
        d = np.zeros((g, width))
        w = np.zeros((g, width))
        x = np.full((g, width), fill_x) if key_x else None
        for j, st in enumerate(stats):
            arr = getattr(st, key_d)
            d[j, : arr.size] = arr
            w[j, : arr.size] = getattr(st, key_w)
            if key_x:
                x[j, : arr.size] = getattr(st, key_x)
        return d, w, x

    d_ia, w_int, lr = stack("d_int_a", "w_int", "log_ratio_int")
    d_left, w_left, _ = stack("d_left", "w_left")
    data = {
        "n_f": np.array([st.n_f for st in stats], float),
        "sum_log_tf": np.array([st.sum_log_tf for st in stats]),
        "sum_d_f": np.array([st.sum_d_f for st in stats]),
        "d_ia": d_ia, "lr_int": lr, "w_int": w_int, "d_left": d_left, "w_left": w_left,
    }
    largest = max(st.d_exposed.size for st in stats)
    if modes is not None and largest > BINNED_FROM:
        caps = np.array([max(np.exp(m.b + SHAPE_CAP_SD * np.sqrt(m.cov[0, 0])),
                             1.5 * np.exp(m.b)) for m in modes])
        binned = [binned_moments(st.d_exposed, st.w_exposed, cap) if st.d_exposed.size else
                  (np.zeros(1), np.zeros((1, TAYLOR_ORDER + 1)))
                  for st, cap in zip(stats, caps, strict=True)]
        width = bucket(max(c.size for c, _ in binned), least=1)
        if width * (TAYLOR_ORDER + 1) * 4 < largest:  # worth it
            centres = np.zeros((g, width))
            coef = np.zeros((g, width, TAYLOR_ORDER + 1))
            for j, (c, a) in enumerate(binned):
                centres[j, : c.size] = c
                coef[j, : c.size] = a
            data.update(bin_c=centres, bin_a=coef, beta_cap=caps)
            return data, np.array([st.log_tref for st in stats])
    d_exp, w_exp, _ = stack("d_exposed", "w_exposed")
    data.update(d_exp=d_exp, w_exp=w_exp)
    return data, np.array([st.log_tref for st in stats])


#: the gate judges the model's parameters, one dimension ``group``; never R(mission), a
#: derived quantity that saturates at 0 or 1 (constant draws, no R-hat) far from the data
GATE_VARS = ["log_shape", "log_scale"]


def gate_dims(names: list[str]) -> dict:
    """``run_nuts`` keywords that gate log shape and log scale of every group by coordinate."""
    return {"gate_vars": GATE_VARS, "dims": {v: ["group"] for v in GATE_VARS},
            "coords": {"group": list(names)}}


def life_gate(names: list[str], mission: float):
    """The gate's quantities in the older labelled layout: log shape and log scale of each
    group, ``name[group]`` (``mission`` is no longer used: R(mission) is not gated)."""

    def gate_on(draws: dict) -> dict:
        out = {}
        for j, name in enumerate(names):
            out[f"log_shape[{name}]"] = draws["log_shape"][:, :, j]
            out[f"log_scale[{name}]"] = draws["log_scale"][:, :, j]
        return out

    return gate_on


def sampler_inputs(stats: list[GroupStats], modes: list[Mode], settings: SamplerSettings):
    """Padded data, reference times, the whitening (mode centre and Laplace Cholesky factor)
    and the chains' starting points, as jax arrays: (args, init_params)."""
    data, log_tref = pad_groups(stats, modes)
    center = np.array([[m.b, m.u] for m in modes])
    chol = np.stack([m.chol() for m in modes])
    rng = np.random.default_rng(settings.seed)
    init = {"z": jnp.asarray(rng.uniform(-1.0, 1.0, size=(settings.num_chains, len(stats), 2)))}
    args = ({k: jnp.asarray(v) for k, v in data.items()}, jnp.asarray(log_tref),
            jnp.asarray(center), jnp.asarray(chol))
    return args, init


def fit_life(stats: list[GroupStats], modes: list[Mode], prior: LifePrior,
             settings: SamplerSettings, names: list[str], mission: float) -> Fit:
    """Sample every group at once (in a float64 scope that restores the caller's jax
    configuration). Draws come back as (chain, draw, group) arrays of ``log_shape`` and
    ``log_scale``; the gate checks both for every group, by coordinate ``group``.
    ``mission`` is kept for callers of earlier versions."""
    with jax_scope():
        args, init = sampler_inputs(stats, modes, settings)
        fit = run_nuts(partial(weibull_life_model, prior=prior), args, settings,
                       init_params=init, **gate_dims(names))
    fit.draws = {"log_shape": fit.draws["log_shape"], "log_scale": fit.draws["log_scale"]}
    return fit
