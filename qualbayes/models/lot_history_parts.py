r"""Lot histories of several parts fitted as independent two-dimensional problems.

The parts of :mod:`qualbayes.models.lot_history` share no parameter: the joint posterior is
the product of one posterior of :math:`(\mathrm{logit}\,\mu_j, \log(\tau_j - \tau_{lo}))`
per part. Sampled jointly, NUTS takes one step size and one tree depth for all 2 x parts
dimensions, set by the hardest part. Here each (part, chain) is its own NUTS chain on the
same one-part model (:func:`~qualbayes.models.lot_history.lot_history_model` with one row),
with its own step-size and mass-matrix adaptation: ``jax.vmap`` over parts inside a
``jax.pmap`` over chains (one CPU device per chain when the process has them, else a vmap).
The gate is then judged per part, and a part that fails it is refitted alone with the
harder settings (twice the draws, target acceptance 0.95) without refitting the others.

Parts are padded to a power of two with empty parts (no terms, weight 0) so that compiled
code is reused across files of similar size; their draws are dropped.
"""

from __future__ import annotations

from functools import lru_cache, partial

import numpy as np

from qualbayes.inference.run import SamplerSettings, jax_scope


def sample_parts(model, xs, ns, ws, scale, s: SamplerSettings):
    """Draws of mu and kappa, shape (chain, draw, parts), and divergences (chain, draw,
    parts), every part its own chain of NUTS per chain index. ``scale``: a float or None."""
    import jax  # noqa: PLC0415
    import jax.numpy as jnp  # noqa: PLC0415

    k = xs.shape[0]
    pad = _bucket(k) - k
    xs, ns, ws = (np.concatenate([a, np.zeros((pad, a.shape[1]))]) for a in (xs, ns, ws))
    with jax_scope():
        parallel = jax.local_device_count() >= s.num_chains and s.chain_method != "vectorized"
        run = _compiled(model, None if scale is None else float(scale), s.num_warmup,
                        s.num_samples, float(s.target_accept), int(s.max_tree_depth), parallel)
        keys = jax.random.split(jax.random.PRNGKey(s.seed), s.num_chains)
        mu, kappa, div = run(keys, jnp.asarray(xs), jnp.asarray(ns), jnp.asarray(ws))
    # (chain, parts, draw) -> (chain, draw, parts), padding removed
    out = [np.moveaxis(np.asarray(a), 1, 2)[:, :, :k] for a in (mu, kappa, div)]
    return out[0], out[1], out[2]


@lru_cache(maxsize=16)
def _compiled(model, scale, num_warmup, num_samples, target_accept, max_tree_depth,
              parallel):
    """One compiled sampler per model and settings: (keys, x, n, w) -> mu, kappa, diverging,
    pmapped (or vmapped) over chains, vmapped over parts."""
    import jax  # noqa: PLC0415
    import jax.numpy as jnp  # noqa: PLC0415
    from numpyro.infer.hmc import hmc  # noqa: PLC0415
    from numpyro.infer.util import constrain_fn, potential_energy  # noqa: PLC0415

    def args(x, n, w):
        return (x[None], n[None], w[None], None if scale is None else jnp.asarray(scale))

    def potential_gen(x, n, w):
        return partial(potential_energy, model, args(x, n, w), {})

    init_kernel, sample_kernel = hmc(potential_fn_gen=potential_gen, algo="NUTS")

    def one(key, x, n, w):
        k_init, k_run = jax.random.split(key)
        z0 = {name: jax.random.uniform(kk, (1, 1), minval=-2.0, maxval=2.0)
              for name, kk in zip(("mu", "spread_y"), jax.random.split(k_init), strict=True)}
        state = init_kernel(z0, num_warmup, target_accept_prob=target_accept,
                            max_tree_depth=max_tree_depth, model_args=(x, n, w),
                            rng_key=k_run)

        def step(st, _):
            st = sample_kernel(st, model_args=(x, n, w))
            return st, (st.z, st.diverging)

        state, _ = jax.lax.scan(step, state, None, length=num_warmup)
        _, (z, div) = jax.lax.scan(step, state, None, length=num_samples)
        site = jax.vmap(lambda zz: constrain_fn(model, args(x, n, w), {}, zz,
                                                return_deterministic=True))(z)
        return site["mu"][:, 0, 0], site["kappa"][:, 0, 0], div

    def chain(key, x, n, w):
        return jax.vmap(one)(jax.random.split(key, x.shape[0]), x, n, w)

    if parallel:
        return jax.pmap(chain, in_axes=(0, None, None, None))
    return jax.jit(jax.vmap(chain, in_axes=(0, None, None, None)))


def _bucket(k: int) -> int:
    return max(2, 1 << (max(k, 1) - 1).bit_length())
