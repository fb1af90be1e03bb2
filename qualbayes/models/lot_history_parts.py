r"""Lot histories of several parts fitted as independent two-dimensional problems.

The parts of :mod:`qualbayes.models.lot_history` share no parameter: the joint posterior is
the product of one posterior of :math:`(\mathrm{logit}\,\mu_j, \log(\tau_j - \tau_{lo}))`
per part. Sampled jointly, NUTS takes one step size and one tree depth for all 2 x parts
dimensions, set by the hardest part. Here each (part, chain) is its own NUTS chain on the
same one-part model (:func:`~qualbayes.models.lot_history.lot_history_model` with one row),
with its own step-size and mass-matrix adaptation: ``jax.vmap`` over a chunk of parts inside
a ``jax.pmap`` over chains (one CPU device per chain when the process has them, else a
vmap). Chunks of :data:`CHUNK` parts run one after another through one compiled sampler per
padded shape. A vmap over parts runs every lane to the deepest tree of the chunk and, under
the batching, both branches of the adaptation's conditionals on every warmup step, so wider
chunks do not pay: measured, 64 parts in one call of 64 had used more CPU, unfinished, than
100 parts in calls of 8 (docs/speed.md, "Many parts with NUTS"). A retry or a close call
of a few parts runs at the next power of two of their number (one part: no vmap at all).

Each part's random keys come from the seed and the part's index in the fit
(:func:`part_keys`), and a vmapped lane never reads another lane's data, so a part's draws
do not depend on the chunk it is sampled in nor on the other parts (tested).

Each part has its own gate (R-hat and ESS of mu and log kappa, and its own divergences): a
part that fails it is refitted alone with twice the warmup and the draws (thinned by 2 to
the others' shape; a divergence anywhere in a thinned pair counts) and a higher target
acceptance, without refitting the others; a part still failing is reported as not
converged and only its lots lose their verdict. A close call continues the adapted chains
of the parts that need it (:func:`continue_parts` with ``parts``: no new warmup, the same
compiled code); the other parts keep their draws.

Parts and terms are padded (a chunk's last part repeated; terms of weight 0) so that
compiled code is reused across files of similar size; padding draws are dropped.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from functools import lru_cache, partial

import numpy as np

from qualbayes.inference.run import Fit, SamplerSettings, jax_scope, record

#: parts per compiled chunk. 1, measured from two sides: a vmap over parts batches NUTS's
#: while loops, whose tracing and compilation cost the demo's first run 13 s and 12 CPU s
#: more than one part at a time (docs/speed.md, "The first run, measured this round"), and
#: 8 against 64 parts per call used more CPU, not less, at 64 ("Many parts with NUTS").
#: A part's draws do not depend on the chunk (its keys come from its own index).
CHUNK = 1


def sample_parts(model, xs, ns, ws, scale, s: SamplerSettings):
    """Draws of mu and kappa, shape (chain, draw, parts), and divergences (chain, draw,
    parts), every part its own chain of NUTS per chain index. ``scale``: a float or None."""
    mu, kappa, div, _ = _run_chunk(model, xs, ns, ws, scale, s)
    return mu, kappa, div


def fit_parts(groups, settings: SamplerSettings, names: list[str], prior,
              model=None, chunk: int | None = None) -> Fit:
    """Every part of ``groups`` (``[(x_j, n_j)]``) its own NUTS problem; see the module text.

    The Fit holds draws ``mu`` and ``kappa`` (chain, draw, part), ``diverging`` (chain,
    draw: any part), ``diverging_parts`` (chain, draw, part), a gate whose ``select(part)``
    sees only that part (its own divergences), and the samplers' states for
    :func:`continue_parts`."""
    from qualbayes import progress  # noqa: PLC0415
    from qualbayes.models.lot_history import lot_history_model, pad  # noqa: PLC0415

    model = model or lot_history_model
    xs, ns, ws = pad(groups)
    scale = None if prior.cv_scale is None else float(prior.cv_scale)
    state = _PartChains(model, xs, ns, ws, scale, settings, list(names), chunk or CHUNK)
    started = progress.fit_started(settings)
    try:
        state.run(np.arange(len(groups)), settings)
        fit = state.fit()
        failed = [j for j, name in enumerate(names) if not fit.gate.select(part=name).passed]
        if failed and settings.retry:
            state.run(np.array(failed), harder_for_part(settings))
            state.retried = [names[j] for j in failed]
            fit = state.fit()
    finally:
        progress.fit_finished(started)
    progress.fit_checked(started, fit.gate.passed, False)
    return record(fit)


def harder_for_part(s: SamplerSettings) -> SamplerSettings:
    """A failing part's retry: twice the warmup and twice the draws, target acceptance at
    least 0.995; the draws are then thinned by 2, so that every part keeps the same (chain,
    draw) shape (thinning an autocorrelated chain keeps most of its effective size)."""
    return replace(s, num_warmup=2 * s.num_warmup, num_samples=2 * s.num_samples,
                   target_accept=max(s.target_accept, 0.995), seed=s.seed + 1, retry=False)


def continue_parts(fit: Fit, num_samples: int | None = None, parts=None) -> Fit:
    """``fit`` (from :func:`fit_parts`) with ``num_samples`` more draws per chain (default:
    as many as it has per chain run), continued from each part's adapted chain; every
    part's gate is judged again on all its draws. ``parts`` (indices into the fit's parts,
    default all): only these are continued, and the Fit returned holds only them, in that
    order (the others keep their draws in ``fit``)."""
    if not isinstance(fit.sampler, _PartChains):
        raise ValueError("this fit holds no per-part sampler state to continue")
    more = int(num_samples or fit.settings.num_samples)
    chains = fit.sampler if parts is None else fit.sampler.subset(parts)
    return record(chains.extended(more).fit())


def is_part_fit(fit: Fit) -> bool:
    """True when ``fit`` came from :func:`fit_parts` (and can be continued part by part)."""
    return isinstance(fit.sampler, _PartChains)


@dataclass
class _PartChains:
    """The draws and last sampler states of every part (chain, part, ...)."""

    model: object
    xs: np.ndarray
    ns: np.ndarray
    ws: np.ndarray
    scale: float | None
    settings: SamplerSettings
    names: list
    chunk: int
    mu: np.ndarray | None = None
    kappa: np.ndarray | None = None
    div: np.ndarray | None = None
    #: per part: (settings it was sampled with, its state pytree, chain-major)
    states: list | None = None
    retried: list | None = None
    continued: int = 0

    def run(self, parts: np.ndarray, s: SamplerSettings) -> None:
        """Sample ``parts`` (indices) with ``s`` in chunks; results replace those parts'."""
        k = len(self.names)
        if self.mu is None:
            shape = (s.num_chains, s.num_samples, k)
            self.mu, self.kappa = np.empty(shape), np.empty(shape)
            self.div = np.zeros(shape, bool)
            self.states = [None] * k
        for start in range(0, len(parts), self.chunk):
            idx = parts[start:start + self.chunk]
            mu, kappa, div, st = _run_chunk(self.model, self.xs[idx], self.ns[idx],
                                            self.ws[idx], self.scale, s, parts=idx,
                                            width=_width(len(parts), self.chunk))
            thin = s.num_samples // self.mu.shape[1]  # a retry's longer chains, thinned
            if thin > 1:
                div = div.reshape(div.shape[0], -1, thin, div.shape[2]).any(axis=2)
                mu, kappa = mu[:, thin - 1::thin], kappa[:, thin - 1::thin]
            self.mu[:, :, idx], self.kappa[:, :, idx], self.div[:, :, idx] = mu, kappa, div
            for i, j in enumerate(idx):
                self.states[j] = (s, _take(st, i))

    def subset(self, parts) -> _PartChains:
        """The same chains for the parts ``parts`` (indices) only, in that order."""
        idx = np.asarray(parts, int)
        names = [self.names[j] for j in idx]
        retried = [n for n in (self.retried or []) if n in names] or None
        return replace(self, xs=self.xs[idx], ns=self.ns[idx], ws=self.ws[idx], names=names,
                       mu=self.mu[:, :, idx], kappa=self.kappa[:, :, idx],
                       div=self.div[:, :, idx], states=[self.states[j] for j in idx],
                       retried=retried)

    def extended(self, more: int) -> _PartChains:
        """Every part's chains continued by ``more`` draws (grouped by the settings their
        warmup used, so each group runs through the code that adapted it)."""
        k = len(self.names)
        new = [np.empty((self.mu.shape[0], more, k)) for _ in range(2)]
        new_div = np.zeros((self.mu.shape[0], more, k), bool)
        states = list(self.states)
        by_settings: dict = {}
        for j, (s, _) in enumerate(self.states):
            by_settings.setdefault(_key(self.model, self.scale, s), []).append(j)
        for key, parts in by_settings.items():
            width = _width(len(parts), self.chunk)
            for start in range(0, len(parts), self.chunk):
                idx = np.array(parts[start:start + self.chunk])
                st = _stack([self.states[j][1] for j in idx])
                mu, kappa, div, st = _continue_chunk(key, st, self.xs[idx], self.ns[idx],
                                                     self.ws[idx], more, width)
                new[0][:, :, idx], new[1][:, :, idx], new_div[:, :, idx] = mu, kappa, div
                for i, j in enumerate(idx):
                    states[j] = (self.states[j][0], _take(st, i))
        return replace(self, mu=np.concatenate([self.mu, new[0]], axis=1),
                       kappa=np.concatenate([self.kappa, new[1]], axis=1),
                       div=np.concatenate([self.div, new_div], axis=1), states=states,
                       continued=self.continued + more)

    def fit(self) -> Fit:
        from qualbayes.inference.gate import diagnose_arrays  # noqa: PLC0415
        from qualbayes.inference.run import chain_method  # noqa: PLC0415

        s = self.settings
        info = {"sampler": "NUTS (numpyro), every part its own sampler",
                "chains": s.num_chains, "warmup": s.num_warmup,
                "draws_per_chain": s.num_samples, "target_accept": s.target_accept,
                "max_tree_depth": s.max_tree_depth, "seed": s.seed,
                "chain_method": chain_method(s.num_chains, s.chain_method),
                "parts_per_chunk": self.chunk}
        if self.retried:
            info["retried_parts"] = list(self.retried)
            info["retry"] = _describe(harder_for_part(s))
        if self.continued:
            info["continued_draws_per_chain"] = self.continued
        dims = {"mu": ["part"], "log_kappa": ["part"]}
        coords = {"part": list(self.names)}
        per_part = self.div.sum(axis=(0, 1))
        gate = diagnose_arrays({"mu": self.mu, "log_kappa": np.log(self.kappa)},
                               int(per_part.sum()), 2 if self.retried else 1, info, dims,
                               coords)
        gate.local_divergences = {"part": {name: int(c) for name, c in
                                           zip(self.names, per_part, strict=True)}}
        return Fit({"mu": self.mu, "kappa": self.kappa}, gate, s, self.div.any(axis=2),
                   {"mu": ["part"], "kappa": ["part"]}, coords, diverging_parts=self.div,
                   sampler=self)


def _describe(s: SamplerSettings) -> dict:
    return {"warmup": s.num_warmup, "target_accept": s.target_accept, "seed": s.seed}


def _key(model, scale, s: SamplerSettings) -> tuple:
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


def _width(parts: int, chunk: int) -> int:
    """Parts per compiled call for a run of ``parts`` parts: the next power of two, at most
    the chunk's, so that a few widths serve every file. Not more: a lane of padding costs as
    much as a real part, and a part that NUTS finds hard (the one a retry is for) would be
    copied into every padding lane."""
    return min(_bucket(parts), _bucket(chunk))


def part_keys(seed: int, parts: np.ndarray, num_chains: int, width: int):
    """Random keys (chain, width, 2): part ``j``'s chains split from ``fold_in(seed, j)``,
    ``j`` its index in the fit, so that a part's stream does not depend on the chunk it is
    sampled in nor on the other parts (padding lanes get the keys of further indices)."""
    import jax  # noqa: PLC0415
    import jax.numpy as jnp  # noqa: PLC0415

    last = int(parts[-1]) if len(parts) else 0
    extra = np.arange(last + 1, last + 1 + width - len(parts))
    idx = jnp.asarray(np.concatenate([np.asarray(parts, int), extra]))
    base = jax.random.PRNGKey(seed)
    keys = jax.vmap(lambda j: jax.random.split(jax.random.fold_in(base, j), num_chains))(idx)
    return jnp.swapaxes(keys, 0, 1)


def _run_chunk(model, xs, ns, ws, scale, s: SamplerSettings, parts=None, width=None):
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
        run, _ = _compiled(*_key(model, scale, s))
        keys = part_keys(s.seed, parts, s.num_chains, width)
        mu, kappa, div, states = run(keys, jnp.asarray(xs), jnp.asarray(ns), jnp.asarray(ws))
    out = [np.moveaxis(np.asarray(a), 1, 2)[:, :, :k] for a in (mu, kappa, div)]
    return out[0], out[1], out[2], jax.tree.map(lambda a: np.asarray(a)[:, :k], states)


def _continue_chunk(key, states, xs, ns, ws, more: int, width: int | None = None):
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


def _take(states, i: int):
    import jax  # noqa: PLC0415

    return jax.tree.map(lambda a: a[:, i], states)


def _stack(states: list):
    import jax  # noqa: PLC0415

    return jax.tree.map(lambda *a: np.stack(a, axis=1), *states)


#: NUTS transitions per call of a chunk's compiled ``steps`` program
STEPS = 500


@lru_cache(maxsize=16)
def _compiled(model, scale, num_warmup, num_samples, target_accept, max_tree_depth,
              parallel, num_chains):
    """One compiled sampler per model and settings: (keys (chain, part), x, n, w) -> mu, kappa,
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

    def advance(states, x, n, w, total, keep=True):
        """``total`` transitions in calls of at most STEPS: (mu, kappa, div) as (chain, part,
        draw) and the last states. States enter every call as numpy arrays (one input
        signature, so the first run and a continuation share one trace)."""
        kept, done = [], 0
        while done < total:
            c = min(STEPS, total - done)
            states = jax.tree.map(np.asarray, states)
            *out, states = steps(states, x, n, w, jnp.asarray(c, jnp.int32))
            if keep:
                kept.append([np.asarray(a)[:, :, :c] for a in out])
            done += c
        if not keep:
            return None, None, None, states
        return (*(np.concatenate([k[i] for k in kept], axis=2) for i in range(3)), states)

    def run(keys, x, n, w):
        *_, states = advance(init(keys, x, n, w), x, n, w, num_warmup, keep=False)
        return advance(states, x, n, w, num_samples)

    def cont(more):
        return partial(advance, total=more)

    return run, cont


def _bucket(k: int) -> int:
    return 1 << (max(k, 1) - 1).bit_length()
