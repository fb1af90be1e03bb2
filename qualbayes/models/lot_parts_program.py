r"""The compiled NUTS program behind :mod:`qualbayes.models.lot_history_parts`: one
part's two-dimensional lot-history posterior sampled by numpyro's NUTS kernel, pmapped (or
vmapped) over chains and, for several parts per call, vmapped over parts.

Two compiled programs per model, shape and settings (:func:`_compiled`): ``init`` (initial
point, step-size search) and ``steps`` (up to :data:`STEPS` transitions, the warmup's
adaptation inside by the iteration counter); warmup, draws and every continuation call the
same ``steps``. The first use of a shape compiles both, each on a thread of its own as
soon as it is lowered (a first-ever run waits for the longest of the
compilations, not their sum). A single part is called
without a vmap (batching NUTS's while loops costs seconds of tracing). Part ``j``'s random
keys come from ``fold_in(seed, j)`` (:func:`part_keys`) and padding lanes repeat the call's
last part, so a part's draws do not depend on the other parts of its call.

>>> width_for(3, 8), width_for(100, 1), width_for(5, 4)
(4, 1, 4)
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from functools import lru_cache, partial

import numpy as np

from qualbayes.inference.run import SamplerSettings, jax_scope


def sampler_key(model, scale, s: SamplerSettings) -> tuple:
    """The arguments of :func:`_compiled` for these settings (one compiled program each)."""
    return (model, None if scale is None else float(scale), int(s.num_warmup),
            int(s.num_samples), float(s.target_accept), int(s.max_tree_depth),
            _parallel(s), int(s.num_chains))


def _parallel(s: SamplerSettings) -> bool:
    import jax  # noqa: PLC0415

    return jax.local_device_count() >= s.num_chains and s.chain_method != "vectorized"


def _padded(arrays, width: int):
    """Each array (part, ...) padded to ``width`` parts by repeating its last part: a
    padding lane then samples a real posterior (a lane of the prior alone could take the
    longest trees of the batch) and its draws are dropped."""
    pad = width - arrays[0].shape[0]
    return [np.concatenate([a, np.repeat(a[-1:], pad, axis=0)]) for a in arrays]


def width_for(parts: int, chunk: int) -> int:
    """Parts per compiled call for a run of ``parts`` parts: the next power of two, at most
    the chunk's, so that a few widths serve every file. Not more: a lane of padding costs as
    much as a real part, and a part that NUTS finds hard (the one a retry is for) would be
    copied into every padding lane."""
    return min(_bucket(parts), _bucket(chunk))


def part_keys(seed: int, parts: np.ndarray, num_chains: int, width: int):
    """Random keys (chain, width, 2): part ``j``'s chains split from ``fold_in(seed, j)``,
    ``j`` its index in the fit, so that a part's stream does not depend on the chunk it is
    sampled in nor on the other parts (padding lanes get the keys of further indices).
    Computed in numpy (:mod:`qualbayes.inference.prng_keys`: no program to lower or
    compile) with the same bits as jax's operations (tested), or by one compiled program
    (:func:`_keys_program`) when jax's random settings are not the ones reproduced there."""
    from qualbayes.inference import prng_keys  # noqa: PLC0415

    idx = _key_indices(parts, width)
    if not prng_keys.available():
        return _keys_program(int(num_chains))(np.int64(seed), idx)
    base = prng_keys.seed_key(seed)
    return np.stack([prng_keys.split(prng_keys.fold_in(base, j), int(num_chains))
                     for j in idx], axis=1)


def _key_indices(parts, width: int) -> np.ndarray:
    """The parts' indices, then the padding lanes' (the indices after the last part's)."""
    last = int(parts[-1]) if len(parts) else 0
    extra = np.arange(last + 1, last + 1 + width - len(parts))
    return np.concatenate([np.asarray(parts, np.int64), extra.astype(np.int64)])


@lru_cache(maxsize=8)
def _keys_program(num_chains: int):
    """(seed, part indices) -> keys (chain, part, 2), compiled (call inside ``jax_scope``):
    :func:`part_keys` when jax's random settings are not those of
    :mod:`qualbayes.inference.prng_keys`."""
    import jax  # noqa: PLC0415
    import jax.numpy as jnp  # noqa: PLC0415

    def keys(seed, idx):
        base = jax.random.PRNGKey(seed)
        split = jax.vmap(lambda j: jax.random.split(jax.random.fold_in(base, j), num_chains))
        return jnp.swapaxes(split(idx), 0, 1)

    return jax.jit(keys)


def run_chunk(model, xs, ns, ws, scale, s: SamplerSettings, parts=None, width=None):
    """One chunk of parts: (chain, draw, part) draws and divergences, and the last states
    (chain, part, ...), padding removed. ``parts``: the chunk's part indices in the fit
    (their random keys, :func:`part_keys`); ``width``: the compiled number of parts."""
    import jax  # noqa: PLC0415
    import jax.numpy as jnp  # noqa: PLC0415

    k = xs.shape[0]
    parts = np.arange(k) if parts is None else np.asarray(parts)
    width = width or _bucket(k)
    xs, ns, ws = _padded([xs, ns, ws], width)
    with jax_scope():
        run, _ = _compiled(*sampler_key(model, scale, s))
        mu, kappa, div, states = run(s.seed, parts, jnp.asarray(xs), jnp.asarray(ns),
                                     jnp.asarray(ws))
    out = [np.moveaxis(np.asarray(a), 1, 2)[:, :, :k] for a in (mu, kappa, div)]
    return out[0], out[1], out[2], jax.tree.map(lambda a: np.asarray(a)[:, :k], states)


def continue_chunk(key, states, xs, ns, ws, more: int, width: int | None = None):
    import jax  # noqa: PLC0415
    import jax.numpy as jnp  # noqa: PLC0415

    k = xs.shape[0]
    width = width or _bucket(k)
    xs, ns, ws = _padded([xs, ns, ws], width)
    states = jax.tree.map(lambda a: np.concatenate(
        [a, np.repeat(a[:, -1:], width - k, axis=1)], axis=1), states)
    with jax_scope():
        _, cont = _compiled(*key)
        mu, kappa, div, states = cont(more)(states, jnp.asarray(xs), jnp.asarray(ns),
                                            jnp.asarray(ws))
    out = [np.moveaxis(np.asarray(a), 1, 2)[:, :, :k] for a in (mu, kappa, div)]
    return out[0], out[1], out[2], jax.tree.map(lambda a: np.asarray(a)[:, :k], states)


def take_part(states, i: int):
    import jax  # noqa: PLC0415

    return jax.tree.map(lambda a: a[:, i], states)


def stack_parts(states: list):
    import jax  # noqa: PLC0415

    return jax.tree.map(lambda *a: np.stack(a, axis=1), *states)


#: NUTS transitions per call of a chunk's compiled ``steps`` program
STEPS = 500


@lru_cache(maxsize=16)
def _compiled(model, scale, num_warmup, num_samples, target_accept, max_tree_depth,
              parallel, num_chains):
    """One compiled sampler per model and settings: (seed, part indices, x, n, w) -> mu, kappa,
    diverging, last states, pmapped (or vmapped) over chains, vmapped over parts; and ``more`` ->
    (states, x, n, w) -> the same, continuing from the states without warmup.

    Two programs: ``init`` (initial point, step-size search) and ``steps`` (up to
    :data:`STEPS` NUTS transitions, warmup adaptation inside by the iteration counter,
    collecting mu, kappa and divergences). Warmup, draws and every continuation call the
    same ``steps``: the NUTS transition is compiled once per shape (it was compiled three
    times: warmup and draws of the first run, and the continuation)."""
    import jax  # noqa: PLC0415
    import jax.numpy as jnp  # noqa: PLC0415
    from numpyro.infer.hmc import hmc  # noqa: PLC0415
    from numpyro.infer.util import constrain_fn, potential_energy  # noqa: PLC0415

    def args(x, n, w):
        return (x[None], n[None], w[None], None if scale is None else jnp.asarray(scale))

    def potential_gen(x, n, w):
        return partial(potential_energy, model, args(x, n, w), {})

    init_kernel, sample_kernel = hmc(potential_fn_gen=potential_gen, algo="NUTS")

    def init_one(key, x, n, w):
        k_init, k_run = jax.random.split(key)
        z0 = {name: jax.random.uniform(kk, (1, 1), minval=-2.0, maxval=2.0)
              for name, kk in zip(("mu", "spread_y"), jax.random.split(k_init), strict=True)}
        return init_kernel(z0, num_warmup, target_accept_prob=target_accept,
                           max_tree_depth=max_tree_depth, model_args=(x, n, w),
                           rng_key=k_run)

    def steps_one(state, x, n, w, count):
        kept = (jnp.zeros(STEPS), jnp.zeros(STEPS), jnp.zeros(STEPS, bool))

        def body(i, carry):
            st, (mu, kappa, div) = carry
            st = sample_kernel(st, model_args=(x, n, w))
            site = constrain_fn(model, args(x, n, w), {}, st.z, return_deterministic=True)
            return st, (mu.at[i].set(site["mu"][0, 0]), kappa.at[i].set(site["kappa"][0, 0]),
                        div.at[i].set(st.diverging))

        state, kept = jax.lax.fori_loop(0, count, body, (state, kept))
        return (*kept, state)

    def over_parts(fn, first, x, n, w, *rest):
        """``fn`` mapped over the parts axis: a vmap, or for a single part a plain call
        (batching NUTS's while loops costs seconds of tracing on every run)."""
        if x.shape[0] == 1:
            one_part = fn(jax.tree.map(lambda a: a[0], first), x[0], n[0], w[0], *rest)
            return jax.tree.map(lambda a: a[None], one_part)
        return jax.vmap(fn, in_axes=(0, 0, 0, 0, *(None,) * len(rest)))(first, x, n, w, *rest)

    def chain_init(keys, x, n, w):
        return over_parts(init_one, keys, x, n, w)

    def chain_steps(states, x, n, w, count):
        return over_parts(steps_one, states, x, n, w, count)

    def mapped(fn, in_axes):
        return jax.pmap(fn, in_axes=in_axes) if parallel else jax.jit(jax.vmap(fn, in_axes))

    init = mapped(chain_init, (0, None, None, None))
    steps = mapped(chain_steps, (0, None, None, None, None))
    ready: dict = {}  # shape_key -> (init, steps) compiled for them

    def shape_key(chains: int, x, n, w) -> tuple:
        return chains, x.shape, n.shape, w.shape

    def programs(x, n, w):
        """``init`` and ``steps``, compiled for these shapes. The first
        time, each is lowered here and compiled on a thread of its own as soon as it is
        lowered (XLA releases the interpreter lock while it compiles, so ``init`` compiles
        while ``steps`` is traced; the persistent cache serves any of them as usual). The
        executables are the programs a plain call would compile, so the draws do not
        change."""
        sig = shape_key(num_chains, x, n, w)
        if sig not in ready:
            width = x.shape[0]
            keys = jax.ShapeDtypeStruct((num_chains, width, 2), jnp.uint32)
            with ThreadPoolExecutor(3) as pool:
                states = jax.eval_shape(init, keys, x, n, w)
                count = jax.ShapeDtypeStruct((), jnp.int32)
                steps_job = pool.submit(steps.lower(states, x, n, w, count).compile)
                init_job = pool.submit(init.lower(keys, x, n, w).compile)
                ready[sig] = (init_job.result(), steps_job.result())
        return ready[sig]

    def advance(states, x, n, w, total, keep=True):
        """``total`` transitions in calls of at most STEPS: (mu, kappa, div) as (chain, part,
        draw) and the last states. States enter every call as numpy arrays (one input
        signature, so the first run and a continuation share one trace)."""
        kept, done = [], 0
        sig = shape_key(jax.tree.leaves(states)[0].shape[0], x, n, w)
        step = ready[sig][1] if sig in ready else steps  # a state from elsewhere: plain call
        while done < total:
            c = min(STEPS, total - done)
            states = jax.tree.map(np.asarray, states)
            *out, states = step(states, x, n, w, jnp.asarray(c, jnp.int32))
            if keep:
                kept.append([np.asarray(a)[:, :, :c] for a in out])
            done += c
        if not keep:
            return None, None, None, states
        return (*(np.concatenate([k[i] for k in kept], axis=2) for i in range(3)), states)

    def run(seed, parts, x, n, w):
        """The first run of parts ``parts`` (their indices in the fit: their random keys,
        :func:`part_keys`) from ``seed``, warmup then draws."""
        start, _ = programs(x, n, w)
        keys = part_keys(seed, parts, num_chains, x.shape[0])
        *_, states = advance(start(keys, x, n, w), x, n, w, num_warmup, keep=False)
        return advance(states, x, n, w, num_samples)

    def cont(more):
        return partial(advance, total=more)

    return run, cont


def _bucket(k: int) -> int:
    return 1 << (max(k, 1) - 1).bit_length()
