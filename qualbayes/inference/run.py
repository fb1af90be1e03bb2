"""Running NUTS and gating the result. Imports jax: only the sampler paths import this.

No side effects on import or call: a library call runs inside :func:`jax_scope` (64-bit
floats, needed by the beta-binomial at large concentration), which restores the caller's
``jax_enable_x64`` on exit, and never touches ``jax_platforms`` or ``XLA_FLAGS``. The chain
method (``parallel`` over CPU devices, or ``vectorized``) and the number of chains are
arguments (:class:`SamplerSettings`). Only the command-line entry point configures the
process (:func:`configure_process`: one CPU device per chain, float64, CPU, a persistent
compilation cache and the compile options COMPILE_FLAGS), before jax is imported.

The sampler of each (model, argument shapes, sampler setting) is built once in the process
and kept (:mod:`qualbayes.inference.nuts_program`): a second fit of the same shape, a retry
of the same setting or a close call's continuation traces and compiles nothing.
"""

from __future__ import annotations

import contextlib
import contextvars
import gc
import os
import sys
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from qualbayes import progress
from qualbayes.inference.gate import GateResult, diagnose, diagnose_arrays

HOST_DEVICES = 4  # the default number of chains
#: XLA's CPU compiler without its newer fusion emitters: the sampler compiles in about half
#: the CPU time at about the same sampling speed (docs/speed.md, "The first run, measured
#: this round"); draws equal to float rounding
COMPILE_FLAGS = "--xla_cpu_use_fusion_emitters=false"
#: the cyclic garbage collector's youngest generation is collected after this many net
#: allocations instead of Python's 700: importing jax, numpyro, pandas and scipy allocates
#: millions of objects that live for the whole command, and collecting them 700 at a time
#: cost about 0.15 s of CPU per command (docs/speed.md); garbage is still collected
GC_YOUNG = 10_000


def configure_process() -> None:
    """For the command line only: set, through the environment and before jax is imported,
    one CPU "device" per chain (chains then run as a pmap, which jax traces once, instead of
    a vmap of NUTS's while loops, whose batching costs seconds of tracing per run; measured:
    1,000 lots, warm cache, 6.3 s vectorised, 2.6 s pmap), 64-bit floats, CPU only, XLA's
    CPU compiler options :data:`COMPILE_FLAGS` (half the compile time), and a
    persistent compilation cache (``QUALBAYES_JAX_CACHE``, "off" for none) so that a second
    run reuses compiled code. Values the user already set in the environment win. If jax is
    already imported, its configuration is updated to the same values. The garbage
    collector's youngest generation is collected less often (:data:`GC_YOUNG`), unless the
    process has already raised it."""
    young, middle, old = gc.get_threshold()
    if 0 < young < GC_YOUNG:
        gc.set_threshold(GC_YOUNG, middle, old)
    flags = os.environ.get("XLA_FLAGS", "")
    if "xla_force_host_platform_device_count" not in flags:
        flags = f"{flags} --xla_force_host_platform_device_count={HOST_DEVICES}".strip()
    if "xla_cpu_use_fusion_emitters" not in flags:
        flags = f"{flags} {COMPILE_FLAGS}"
    os.environ["XLA_FLAGS"] = flags
    values = {"JAX_ENABLE_X64": "1", "JAX_PLATFORMS": "cpu"}
    cache = os.environ.get("QUALBAYES_JAX_CACHE",
                           str(Path.home() / ".cache" / "qualbayes" / "jax"))
    progress.compile_notice(cache)
    if cache and cache.lower() != "off":
        try:
            Path(cache).mkdir(parents=True, exist_ok=True)
            values |= {"JAX_COMPILATION_CACHE_DIR": cache,
                       "JAX_PERSISTENT_CACHE_MIN_COMPILE_TIME_SECS": "0",
                       "JAX_PERSISTENT_CACHE_MIN_ENTRY_SIZE_BYTES": "0"}
        except OSError:
            pass
    for key, value in values.items():
        os.environ.setdefault(key, value)
    if "jax" in sys.modules:
        import jax  # noqa: PLC0415

        jax.config.update("jax_enable_x64", True)
        if "JAX_COMPILATION_CACHE_DIR" in values:
            jax.config.update("jax_compilation_cache_dir", os.environ["JAX_COMPILATION_CACHE_DIR"])
            jax.config.update("jax_persistent_cache_min_compile_time_secs", 0.0)
            jax.config.update("jax_persistent_cache_min_entry_size_bytes", 0)


def setup_jax() -> None:
    """Kept for callers of earlier versions: does nothing (importing a model no longer
    configures jax; see :func:`jax_scope` and :func:`configure_process`)."""


@contextlib.contextmanager
def jax_scope():
    """64-bit floats inside, the caller's setting restored on exit (re-entrant)."""
    import jax  # noqa: PLC0415

    with jax.enable_x64(True):
        yield


_RECORDER: contextvars.ContextVar[list | None] = contextvars.ContextVar("fits", default=None)


@contextlib.contextmanager
def recording_fits():
    """Collect every :class:`Fit` that :func:`run_nuts` returns inside the block (the API
    uses it to give a result its InferenceData without reaching into the question's code)."""
    fits: list = []
    token = _RECORDER.set(fits)
    try:
        yield fits
    finally:
        _RECORDER.reset(token)


def record(fit: Fit) -> Fit:
    """Hand ``fit`` to the enclosing :func:`recording_fits` block, if any (for samplers that
    do not go through :func:`run_nuts`); returns it."""
    if (fits := _RECORDER.get()) is not None:
        fits.append(fit)
    return fit


def _map_counts() -> tuple[int, int] | None:
    """(memory mappings of this process, the system's limit), or None off Linux."""
    try:
        with open("/proc/self/maps", "rb") as f:
            used = sum(1 for _ in f)
        with open("/proc/sys/vm/max_map_count") as f:
            return used, int(f.read().strip())
    except (OSError, ValueError):
        return None


def relieve_memory_maps(share: float = 0.5) -> bool:
    """Drop jax's in-memory compiled code when this process holds more than ``share`` of the
    system's memory-mapping limit. Each new compilation keeps about 30 mappings alive (measured
    with jax 0.10 on Linux), so a process that fits many models of different shapes (a study, a
    notebook, a test run) otherwise ends with LLVM failing to allocate code memory after a
    few thousand compilations. Compiled code is reloaded from the persistent cache when needed.
    Returns True when it cleared."""
    counts = _map_counts()
    if counts is None or counts[0] < share * counts[1]:
        return False
    import gc  # noqa: PLC0415

    import jax  # noqa: PLC0415

    from qualbayes.inference import nuts_program  # noqa: PLC0415

    nuts_program.forget()  # the kept samplers hold compiled code too
    jax.clear_caches()
    gc.collect()
    return True


@dataclass
class SamplerSettings:
    num_chains: int = 4
    num_warmup: int = 1000
    num_samples: int = 1000
    target_accept: float = 0.9
    max_tree_depth: int = 10
    seed: int = 20261202
    retry: bool = True
    #: "parallel" (one device per chain), "vectorized", "sequential", or None: parallel when
    #: there are enough devices, else vectorized (both give the same draws for one seed)
    chain_method: str | None = None

    def harder(self) -> SamplerSettings:
        """The retry: twice the draws, a higher target acceptance (smaller steps): at least
        0.95, and halfway from the first run's target to 1 when that was already 0.95 or
        more (0.95 -> 0.975, 0.99 -> 0.995), so that a retry after divergences always takes
        smaller steps (before, a run at 0.95 was retried at 0.95)."""
        target = (max(self.target_accept, 0.95) if self.target_accept < 0.95
                  else self.target_accept + (1.0 - self.target_accept) / 2.0)
        return replace(self, num_warmup=2 * self.num_warmup, num_samples=2 * self.num_samples,
                       target_accept=target, seed=self.seed + 1, retry=False)


@dataclass
class Fit:
    draws: dict[str, np.ndarray]  # name -> (chain, draw, *shape)
    gate: GateResult
    settings: SamplerSettings
    #: per (chain, draw): True where the transition diverged (any part, when the parts were
    #: sampled as independent problems)
    diverging: np.ndarray | None = None
    dims: dict = field(default_factory=dict)  # name -> trailing dimension names
    coords: dict = field(default_factory=dict)  # dimension -> labels
    #: per (chain, draw, part) when every part is its own sampler (its own divergences)
    diverging_parts: np.ndarray | None = None
    #: the adapted sampler behind the draws (step size, mass matrix, last state), for
    #: :func:`continue_nuts`; None when it cannot be continued
    sampler: object | None = field(default=None, repr=False, compare=False)

    def __getstate__(self) -> dict:
        """Pickled (e.g. to another process) without the sampler, which holds compiled code:
        the copy's draws and gate are whole, it just cannot be continued."""
        return self.__dict__ | {"sampler": None}

    def to_idata(self, observed: dict | None = None, observed_dims: dict | None = None,
                 coords: dict | None = None):
        """The draws as an ``arviz.InferenceData`` (imports arviz): posterior with named
        dimensions and coordinates, sample stats (``diverging``, with the dimension ``part``
        when every part was its own sampler) and observed data."""
        dims, diverging = dict(self.dims), self.diverging
        if self.diverging_parts is not None:
            diverging, dims = self.diverging_parts, dims | {"diverging": ["part"]}
        return to_idata(self.draws, diverging, dims, self.coords | (coords or {}),
                        observed, observed_dims)


def to_idata(draws: dict, diverging=None, dims: dict | None = None, coords: dict | None = None,
             observed: dict | None = None, observed_dims: dict | None = None):
    """``arviz.InferenceData`` from arrays (chain, draw, *shape) (imports arviz)."""
    import warnings  # noqa: PLC0415

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)
        import arviz as az  # noqa: PLC0415

    dims = dict(dims or {}) | dict(observed_dims or {})
    stats = None
    if diverging is not None:
        stats = {"diverging": np.asarray(diverging, dtype=bool)}
    return az.from_dict(posterior={k: np.asarray(v) for k, v in draws.items()},
                        sample_stats=stats, observed_data=observed, coords=coords, dims=dims)


def show_progress() -> bool:
    """No sampler progress bar: qualbayes.progress shows each fit with its time elapsed
    (kept for earlier callers)."""
    return False


def run_nuts(model: Callable, model_args: tuple, settings: SamplerSettings,
             gate_on: Callable[[dict], dict] | None = None,
             init_params: dict | None = None, *, gate_vars: list[str] | None = None,
             dims: dict | None = None, coords: dict | None = None,
             transform: Callable[[dict], dict] | None = None) -> Fit:
    """Sample ``model(*model_args)`` with NUTS, vectorised chains; gate; retry once.

    The gate checks ``gate_vars`` (sites, with ``dims``/``coords`` naming their trailing axes
    so selection is by coordinate), or what ``gate_on`` maps the draws to (the older layout:
    ``{"mu[A]": (chain, draw)}``), or else every site. ``transform`` maps the sampler's draws
    to the ones the Fit keeps (e.g. padding removed). The Fit keeps the adapted sampler:
    :func:`continue_nuts` draws more from it without a new warmup.
    """
    attempt_settings = settings
    attempts = 0
    with jax_scope():
        while True:
            attempts += 1
            started = progress.fit_started(attempt_settings)
            try:
                raw, diverging, runner = _sample(model, model_args, attempt_settings,
                                                 init_params)
            finally:
                progress.fit_finished(started)
            chains = _Chains(runner, model_args, raw, diverging, gate_on, gate_vars, dims, coords,
                             transform, attempts)
            fit = chains.fit(attempt_settings)
            progress.fit_checked(started, fit.gate.passed, attempt_settings.retry)
            if fit.gate.passed or not attempt_settings.retry:
                record(fit)
                relieve_memory_maps()
                return fit
            attempt_settings = attempt_settings.harder()


def continue_nuts(fit: Fit, num_samples: int | None = None) -> Fit:
    """``fit`` with ``num_samples`` more draws per chain (default: as many as it has per
    chain run) from its adapted sampler: the chains continue from their last state with the
    step size and mass matrix of the warmup (no new warmup), the draws are appended along
    the draw axis and the gate is judged again on all of them. The input is left unchanged.
    ``ValueError`` when the fit holds no sampler (:attr:`Fit.sampler` is None)."""
    if not isinstance(fit.sampler, _Chains):
        raise ValueError("this fit holds no sampler state to continue")
    more = int(num_samples or fit.settings.num_samples)
    with jax_scope():
        started = progress.fit_started(replace(fit.settings, num_warmup=0, num_samples=more))
        try:
            chains = fit.sampler.extended(more)
        finally:
            progress.fit_finished(started)
        out = chains.fit(fit.settings)
    progress.fit_checked(started, out.gate.passed, False)
    return record(out)


def counted_as_retry(fit: Fit) -> Fit:
    """``fit``, drawn by a caller as the retry of an earlier fit that failed the gate: its
    gate (and that of any continuation of it) says 2 attempts. Changes ``fit`` in place."""
    fit.gate.attempts = 2
    if isinstance(fit.sampler, _Chains):
        fit.sampler.attempts = 2
    return fit


@dataclass
class _Chains:
    """The sampler of one NUTS run and every draw it has given (raw sites, before
    ``transform``), so that more draws can follow without a new warmup."""

    runner: tuple  # (nuts_program.Program, the chains' last state)
    model_args: tuple
    raw: dict
    diverging: np.ndarray
    gate_on: Callable | None
    gate_vars: list[str] | None
    dims: dict | None
    coords: dict | None
    transform: Callable | None
    attempts: int
    continued: int = 0  # draws per chain added after the first run

    def fit(self, s: SamplerSettings) -> Fit:
        raw, divergences = self.raw, int(self.diverging.sum())
        info = _settings_dict(s) | ({"continued_draws_per_chain": self.continued}
                                    if self.continued else {})
        if self.gate_vars is not None:
            gate = diagnose_arrays({k: raw[k] for k in self.gate_vars}, divergences,
                                   self.attempts, info, self.dims, self.coords)
        else:
            gate = diagnose(self.gate_on(raw) if self.gate_on else raw, divergences,
                            self.attempts, info)
        draws = self.transform(raw) if self.transform else dict(raw)
        return Fit(draws, gate, s, self.diverging, dict(self.dims or {}),
                   dict(self.coords or {}), sampler=self)

    def extended(self, more: int) -> _Chains:
        """More draws from the last state (the same kept program: compiled once per shape)."""
        program, state = self.runner
        state, new, div = program.advance(state, self.model_args, more)
        raw = {k: np.concatenate([self.raw[k], new[k]], axis=1) for k in self.raw}
        return replace(self, runner=(program, state),
                       raw=raw, diverging=np.concatenate([self.diverging, div], axis=1),
                       continued=self.continued + more)


def chain_method(num_chains: int, requested: str | None = None) -> str:
    """``requested``, or ``parallel`` (pmap over CPU devices) when there is a device per
    chain, else ``vectorized``; both give the same draws for the same seed."""
    if requested is not None:
        return requested
    import jax  # noqa: PLC0415

    return "parallel" if jax.local_device_count() >= num_chains else "vectorized"


def _settings_dict(s: SamplerSettings) -> dict:
    return {"sampler": "NUTS (numpyro)", "chains": s.num_chains, "warmup": s.num_warmup,
            "draws_per_chain": s.num_samples, "target_accept": s.target_accept,
            "max_tree_depth": s.max_tree_depth, "seed": s.seed,
            "chain_method": chain_method(s.num_chains, s.chain_method)}


def _sample(model, model_args, s: SamplerSettings, init_params):
    """Warmup and draws through the process's kept program for this model, shape and
    setting (:mod:`qualbayes.inference.nuts_program`): a second fit of the same shape in
    this process traces, lowers and compiles nothing."""
    from qualbayes.inference.nuts_program import program_for  # noqa: PLC0415

    if init_params is not None:
        import jax  # noqa: PLC0415
        import jax.numpy as jnp  # noqa: PLC0415

        init_params = jax.tree.map(lambda a: jnp.asarray(a, jnp.result_type(a)), init_params)
    program = program_for(model, model_args, num_chains=s.num_chains,
                          num_warmup=s.num_warmup, target_accept=s.target_accept,
                          max_tree_depth=s.max_tree_depth,
                          method=chain_method(s.num_chains, s.chain_method),
                          init_params=init_params)
    state = program.start(s.seed, model_args, init_params)
    state, _, _ = program.advance(state, model_args, s.num_warmup, keep=False)
    state, samples, diverging = program.advance(state, model_args, s.num_samples)
    return samples, diverging, (program, state)
