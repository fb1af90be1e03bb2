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
(:func:`continue_parts`: every part, or only the parts given, each from its own state; no
new warmup, the same compiled code).

Parts and terms are padded (a chunk's last part repeated; terms of weight 0) so that
compiled code is reused across files of similar size; padding draws are dropped. The
compiled sampler itself is :mod:`qualbayes.models.lot_parts_program`; this module keeps the
parts' draws and states, their gates, retries and continuations.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from qualbayes.inference.run import Fit, SamplerSettings, record
from qualbayes.models.lot_parts_program import (  # noqa: F401 - _compiled, part_keys: for callers
    _compiled,
    continue_chunk,
    part_keys,
    run_chunk,
    sampler_key,
    stack_parts,
    take_part,
    width_for,
)

#: parts per compiled chunk. 1, measured from three sides: a vmap over parts batches NUTS's
#: while loops, whose tracing and compilation cost the demo's first run 13 s and 12 CPU s
#: more than one part at a time (docs/speed.md, "The first run, measured this round"); 8
#: against 64 parts per call used more CPU, not less, at 64 ("Many parts with NUTS"); and
#: 100 parts x 20 lots took 198 CPU s at 1 part per call against 240 s at 8, with the same
#: draws ("Many parts: the outlier check on one grid, parts per call"). A part's draws do
#: not depend on the chunk (its keys come from its own index).
CHUNK = 1


def sample_parts(model, xs, ns, ws, scale, s: SamplerSettings):
    """Draws of mu and kappa, shape (chain, draw, parts), and divergences (chain, draw,
    parts), every part its own chain of NUTS per chain index. ``scale``: a float or None."""
    mu, kappa, div, _ = run_chunk(model, xs, ns, ws, scale, s)
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
        state.run(np.arange(len(groups)), settings, started)
        fit = state.fit()
        failed = [j for j, name in enumerate(names) if not fit.gate.select(part=name).passed]
        if failed and settings.retry:
            state.run(np.array(failed), harder_for_part(settings), started)
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
    from qualbayes import progress  # noqa: PLC0415

    if not isinstance(fit.sampler, _PartChains):
        raise ValueError("this fit holds no per-part sampler state to continue")
    more = int(num_samples or fit.settings.num_samples)
    chains = fit.sampler if parts is None else fit.sampler.subset(parts)
    k = len(chains.names)
    started = progress.fit_started(replace(fit.settings, num_warmup=0, num_samples=more),
                                   what=f"more draws for close calls, {k:,} part{'s' * (k > 1)}")
    try:
        out = chains.extended(more, started).fit()
    finally:
        progress.fit_finished(started)
    progress.fit_checked(started, out.gate.passed, False)
    return record(out)


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

    def run(self, parts: np.ndarray, s: SamplerSettings, started=None) -> None:
        """Sample ``parts`` (indices) with ``s`` in chunks; results replace those parts'.
        ``started``: the progress line of the fit (:func:`qualbayes.progress.fit_started`)."""
        from qualbayes import progress  # noqa: PLC0415

        k = len(self.names)
        if self.mu is None:
            shape = (s.num_chains, s.num_samples, k)
            self.mu, self.kappa = np.empty(shape), np.empty(shape)
            self.div = np.zeros(shape, bool)
            self.states = [None] * k
        for start in range(0, len(parts), self.chunk):
            idx = parts[start:start + self.chunk]
            mu, kappa, div, st = run_chunk(self.model, self.xs[idx], self.ns[idx],
                                            self.ws[idx], self.scale, s, parts=idx,
                                            width=width_for(len(parts), self.chunk))
            thin = s.num_samples // self.mu.shape[1]  # a retry's longer chains, thinned
            if thin > 1:
                div = div.reshape(div.shape[0], -1, thin, div.shape[2]).any(axis=2)
                mu, kappa = mu[:, thin - 1::thin], kappa[:, thin - 1::thin]
            self.mu[:, :, idx], self.kappa[:, :, idx], self.div[:, :, idx] = mu, kappa, div
            for i, j in enumerate(idx):
                self.states[j] = (s, take_part(st, i))
            if started is not None:
                progress.fit_step(started, start + len(idx), len(parts), "parts")

    def subset(self, parts) -> _PartChains:
        """The same chains for the parts ``parts`` (indices) only, in that order."""
        idx = np.asarray(parts, int)
        names = [self.names[j] for j in idx]
        retried = [n for n in (self.retried or []) if n in names] or None
        return replace(self, xs=self.xs[idx], ns=self.ns[idx], ws=self.ws[idx], names=names,
                       mu=self.mu[:, :, idx], kappa=self.kappa[:, :, idx],
                       div=self.div[:, :, idx], states=[self.states[j] for j in idx],
                       retried=retried)

    def extended(self, more: int, started=None) -> _PartChains:
        """Every part's chains continued by ``more`` draws (grouped by the settings their
        warmup used, so each group runs through the code that adapted it). ``started``: the
        progress line of the continuation."""
        from qualbayes import progress  # noqa: PLC0415

        k, done = len(self.names), 0
        new = [np.empty((self.mu.shape[0], more, k)) for _ in range(2)]
        new_div = np.zeros((self.mu.shape[0], more, k), bool)
        states = list(self.states)
        by_settings: dict = {}
        for j, (s, _) in enumerate(self.states):
            by_settings.setdefault(sampler_key(self.model, self.scale, s), []).append(j)
        for key, parts in by_settings.items():
            width = width_for(len(parts), self.chunk)
            for start in range(0, len(parts), self.chunk):
                idx = np.array(parts[start:start + self.chunk])
                st = stack_parts([self.states[j][1] for j in idx])
                mu, kappa, div, st = continue_chunk(key, st, self.xs[idx], self.ns[idx],
                                                     self.ws[idx], more, width)
                new[0][:, :, idx], new[1][:, :, idx], new_div[:, :, idx] = mu, kappa, div
                for i, j in enumerate(idx):
                    states[j] = (self.states[j][0], take_part(st, i))
                done += len(idx)
                if started is not None:
                    progress.fit_step(started, done, k, "parts")
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
