"""The first run: what the life command imports, that the compilation cache is filled by the
first real use, and the one-off ``qualbayes prepare`` (its invented inputs have the shapes it
promises; it refuses when there is no cache). Timings are measured by
bench/bench_first_run.py, not here."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from conftest import EXAMPLES, ROOT
from scipy import stats

from qualbayes.commands.prepare import LIFE_SHAPES, LOT_SHAPES, jobs


def _env(cache: str) -> dict:
    env = {k: v for k, v in os.environ.items() if not k.startswith(("JAX_", "XLA_"))}
    env |= {"PYTHONPATH": str(ROOT), "QUALBAYES_JAX_CACHE": cache}
    return env


def test_life_imports_no_arviz_and_fills_an_empty_cache_on_first_use(tmp_path):
    """A first-ever life run (empty cache folder): ArviZ and matplotlib are never imported
    (PSIS is numpy: qualbayes.inference.psis), and the compiled sampler is in the persistent
    cache when the run ends, so the second run loads it instead of compiling."""
    cache = tmp_path / "cache"
    code = ("import io, contextlib, json, sys\nfrom qualbayes.cli import main\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            f"    rc = main(['life', {str(EXAMPLES / 'sv30_rig_test.csv')!r}, '--mission', "
            "'2000', '--target', '0.9'])\n"
            "print(json.dumps([rc, sorted(m for m in ('jax', 'numpyro', 'arviz', "
            "'matplotlib', 'pandas') if m in sys.modules)]))\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         env=_env(str(cache)), cwd=tmp_path, timeout=900)
    assert out.returncode == 0, out.stderr[-3000:]
    rc, loaded = json.loads(out.stdout.strip().splitlines()[-1])
    assert rc == 0
    assert "arviz" not in loaded and "matplotlib" not in loaded
    assert "jax" in loaded  # the life question samples (the test would be empty otherwise)
    entries = [p.name for p in cache.iterdir()]
    assert any(name.startswith("jit__fun-") for name in entries), entries


def test_prepare_refuses_without_a_cache(tmp_path):
    code = "from qualbayes.cli import main\nraise SystemExit(main(['prepare']))\n"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         env=_env("off"), cwd=tmp_path, timeout=300)
    assert out.returncode == 2, out.stderr
    assert "compilation cache is off" in out.stderr
    assert list(tmp_path.iterdir()) == []


def test_prepare_inputs_have_the_shapes_it_names(tmp_path):
    """Each invented lots file has exactly the promised distinct (defectives, inspected)
    pairs per part, so its padded term axis is the bucket named; each life file the
    promised group sizes; every file reads through the same validation as users' files."""
    from qualbayes.data.frames import life_table, lots_table
    from qualbayes.models.lot_history import bucket

    todo = jobs(tmp_path)
    assert len(todo) == len(LOT_SHAPES) + len(LIFE_SHAPES)
    for (_, parts, distinct), (_, argv) in zip(LOT_SHAPES, todo, strict=False):
        frame = lots_table(Path(argv[1])).frame
        by_part = frame.groupby("part")
        assert by_part.ngroups == parts
        for _, lots in by_part:
            pairs = set(zip(lots["defectives"], lots["inspected"], strict=True))
            assert len(pairs) == distinct
        assert bucket(distinct) == distinct  # exactly at a bucket: the largest it covers
    for (_, sizes), (_, argv) in zip(LIFE_SHAPES, todo[len(LOT_SHAPES):], strict=True):
        frame = life_table(Path(argv[1])).frame
        assert sorted(frame.groupby("group").size()) == sorted(sizes)
        assert set(frame["kind"]) == {"failure", "suspension"} or len(set(frame["kind"])) == 2


@pytest.mark.parametrize("kappa", [2.0, 50.0, 1e3, 1e5, 1e7, 1e8])
@pytest.mark.parametrize("mu", [1e-4, 0.01, 0.3])
def test_short_beta_binomial_equals_scipy(mu, kappa):
    """models/beta_binomial.py against scipy.stats.betabinom.logpmf (reference library) over
    the concentrations the lots model allows (KAPPA_MAX = 1e8). Tolerance: the float64
    rounding of ten log-gamma terms, each about eps x z log z at its largest argument
    z = n + a + b (docs/references.md, "PSIS in numpy and the first run")."""
    from qualbayes.models.beta_binomial import log_pmf

    x = np.array([0.0, 1, 2, 5, 0, 17])
    n = np.array([80.0, 80, 125, 200, 1250, 5000])
    a, b = mu * kappa, (1 - mu) * kappa
    ref = stats.betabinom.logpmf(x, n, a, b)
    z = n + kappa
    tol = 1e-13 + 10 * np.finfo(float).eps * z * np.log(z + 2)
    assert np.all(np.abs(log_pmf(x, n, a, b, xp=np) - ref) <= tol)
    import jax

    with jax.enable_x64(True):
        got = np.asarray(log_pmf(x, n, a, b))
    assert np.all(np.abs(got - ref) <= tol), (got - ref, tol)


@pytest.mark.parametrize("kappa", [2.0, 50.0, 1e3, 1e5, 1e7, 1e8])
@pytest.mark.parametrize("mu", [1e-4, 0.01, 0.3])
def test_sampled_kernel_is_scipy_logpmf_without_the_coefficient(mu, kappa):
    """``beta_binomial.log_kernel`` (what the history samplers use: six log-gammas in one
    call) plus log C(n, x) against scipy.stats.betabinom.logpmf (reference library), for
    two parts at once (a, b one per row), with the tolerance of the test above."""
    import jax
    from scipy import special

    from qualbayes.models.beta_binomial import log_kernel

    x = np.array([[0.0, 1, 2, 5, 0, 17], [3.0, 0, 0, 1, 4, 0]])
    n = np.array([[80.0, 80, 125, 200, 1250, 5000], [50.0, 315, 80, 125, 200, 2000]])
    a = np.array([[mu * kappa], [mu * kappa / 2]])
    b = np.array([[(1 - mu) * kappa], [(1 - mu) * kappa / 2]])
    ref = stats.betabinom.logpmf(x, n, a, b)
    z = n + kappa
    tol = 1e-13 + 10 * np.finfo(float).eps * z * np.log(z + 2)
    with jax.enable_x64(True):
        got = np.asarray(log_kernel(x, n, a, b)) + np.log(special.comb(n, x))
    assert np.all(np.abs(got - ref) <= tol), (got - ref, tol)


@pytest.mark.parametrize("prior", ["history", "history-phi-uniform"])
def test_history_log_density_differs_from_the_full_one_by_a_constant(prior):
    """The lots history models (likelihood without the binomial coefficients) against the
    same model written with the full beta-binomial log pmf: at several (mu, kappa) of two
    parts the log densities differ by the same constant, sum(w log C(n, x)) (so NUTS, which
    sees only differences and gradients, has the same target), and the gradients agree."""
    import jax
    import jax.numpy as jnp
    import numpyro
    from numpyro.infer.util import log_density
    from scipy import special

    from qualbayes.models import lot_history as lh
    from qualbayes.models.beta_binomial import log_pmf

    def full(x, n, w, scale):
        mu, kappa = lh.hyperprior_sites(x.shape[0], scale)
        ll = log_pmf(x, n, mu * kappa, (1.0 - mu) * kappa, xp=jnp)
        numpyro.factor("x", jnp.sum(w * ll))

    model, scale = ((lh.lot_history_model, 0.5) if prior == "history"
                    else (lh.lot_history_model_phi_uniform, None))
    xs, ns, ws = lh.pad([(np.array([0.0, 1, 0, 3, 0]), np.array([80.0, 125, 125, 200, 50])),
                         (np.array([2.0, 0, 0]), np.array([315.0, 315, 80]))])
    constant = float(np.sum(ws * np.log(special.comb(ns, xs))))
    with jax.enable_x64(True):
        args = (jnp.asarray(xs), jnp.asarray(ns), jnp.asarray(ws), scale)

        def lp(which, p):
            return log_density(which, args, {}, p)[0]

        for mu, y in [(0.01, -3.0), (0.002, 0.5), (0.3, -8.0), (0.05, 2.0)]:
            params = {"mu": jnp.full((2, 1), mu), "spread_y": jnp.full((2, 1), y)}
            new, old = float(lp(model, params)), float(lp(full, params))
            assert abs(old - new - constant) <= 1e-9 * max(1.0, abs(old)), (old, new, constant)
            g_new = jax.grad(lambda p: lp(model, p))(params)
            g_old = jax.grad(lambda p: lp(full, p))(params)
            for k in params:
                np.testing.assert_allclose(np.asarray(g_new[k]), np.asarray(g_old[k]),
                                           rtol=1e-9, atol=1e-9)


SAME_SHAPE = r"""
import json
from qualbayes.inference.run import configure_process
configure_process()  # the command line's process: a CPU device per chain, cache on
import jax
import numpy as np
from qualbayes.inference import nuts_program
from qualbayes.inference.run import SamplerSettings, chain_method
from qualbayes.models.lot_history import fit_histories
events = []
jax.monitoring.register_event_listener(lambda e, **k: events.append(e))
fast = SamplerSettings(num_warmup=200, num_samples=200, seed=3, retry=False)
out = {"method": chain_method(fast.num_chains)}
n = np.array([80.0, 80, 125, 200, 125])
for name, x in (("first", [0, 1, 2, 0, 1]), ("second", [3, 0, 0, 1, 5])):
    if name == "second":  # as a new process would: nothing kept in memory
        nuts_program.forget()
        jax.clear_caches()
    events.clear()
    fit = fit_histories([(np.array(x, float), n)], fast)
    out[name] = {"hits": sum(e.endswith("cache_hits") for e in events),
                 "misses": sum(e.endswith("cache_misses") for e in events),
                 "mu": float(fit.draws["mu"].mean())}
print(json.dumps(out))
"""


def test_one_compiled_sampler_serves_new_data_of_the_same_shape(tmp_path):
    """With a CPU device per chain (the command line), a second data set of the same padded
    shape, with nothing kept in memory (the kept sampler dropped, as in a new process), is
    served from the persistent cache: no compilation misses (numpyro's built-in parallel
    method baked the data into the program and compiled again: one miss)."""
    out = subprocess.run([sys.executable, "-c", SAME_SHAPE], capture_output=True, text=True,
                         env=_env(str(tmp_path / "cache")), cwd=tmp_path, timeout=900)
    assert out.returncode == 0, out.stderr[-3000:]
    got = json.loads(out.stdout.strip().splitlines()[-1])
    assert got["method"] == "parallel"
    assert got["first"]["misses"] >= 1  # the first-ever fit compiles
    assert got["second"]["misses"] == 0 and got["second"]["hits"] >= 1, got
    assert got["first"]["mu"] != got["second"]["mu"]  # really other data


def test_kept_program_gives_numpyro_draws_and_continues_them():
    """The kept two-program sampler (inference/nuts_program.py) is numpyro's NUTS with the
    loop cut into calls: same seed, same draws and divergences as ``MCMC.run`` (the chains as
    the command line maps them, data as inputs), and a continuation equals numpyro's own
    continuation from ``post_warmup_state``. Exactly equal (measured: every bit): the
    transitions are the same operations, only the loop around them is cut into calls."""
    import jax
    import jax.numpy as jnp
    from numpyro.infer import MCMC, NUTS

    from qualbayes.inference import nuts_program
    from qualbayes.inference.compile_cache import chain_runner
    from qualbayes.inference.run import SamplerSettings, chain_method, continue_nuts, run_nuts
    from qualbayes.models.lot_history import lot_history_model, pad

    n = np.array([80.0, 125, 200, 80, 125, 200, 80])
    xs, ns, ws = pad([(np.array([0.0, 1, 3, 0, 2, 0, 1]), n)])
    args = (jnp.asarray(xs), jnp.asarray(ns), jnp.asarray(ws), jnp.asarray(0.5))
    s = SamplerSettings(num_warmup=150, num_samples=120, target_accept=0.95, seed=11,
                        retry=False)
    plain_calls = []  # the uncompiled programs are only lowered (compiled ahead of time)
    real_build = nuts_program._build

    class Counted:
        def __init__(self, fn):
            self.fn, self.lower = fn, fn.lower

        def __call__(self, *a):  # eval_shape's abstract call (tracers) is not a run
            if not any(isinstance(v, jax.core.Tracer) for v in jax.tree.leaves(a)):
                plain_calls.append(1)
            return self.fn(*a)

    def build(*a, **k):
        program = real_build(*a, **k)
        program.init, program.steps = Counted(program.init), Counted(program.steps)
        return program

    nuts_program.forget()
    with pytest.MonkeyPatch.context() as mp, jax.enable_x64(True):
        mp.setattr(nuts_program, "_build", build)
        fit = run_nuts(lot_history_model, args, s)
        more = continue_nuts(fit, 80)
    nuts_program.forget()
    assert plain_calls == []
    with jax.enable_x64(True):
        mcmc = MCMC(NUTS(lot_history_model, target_accept_prob=0.95),
                    num_warmup=150, num_samples=120, num_chains=4, progress_bar=False,
                    chain_method=chain_runner(chain_method(4)), jit_model_args=True)
        mcmc.run(jax.random.PRNGKey(11), *args, extra_fields=("diverging",))
        ref = {k: np.asarray(v) for k, v in mcmc.get_samples(group_by_chain=True).items()}
        ref_div = np.asarray(mcmc.get_extra_fields(group_by_chain=True)["diverging"])
        mcmc.post_warmup_state = mcmc.last_state
        mcmc.num_samples = 80
        mcmc.run(mcmc.last_state.rng_key, *args, extra_fields=("diverging",))
        ref_more = {k: np.asarray(v) for k, v in mcmc.get_samples(group_by_chain=True).items()}
    assert set(fit.draws) == set(ref)
    for k in ref:
        assert fit.draws[k].shape == ref[k].shape == (4, 120, 1, 1)
        np.testing.assert_array_equal(fit.draws[k], ref[k])
        np.testing.assert_array_equal(more.draws[k][:, 120:], ref_more[k])
        np.testing.assert_array_equal(more.draws[k][:, :120], fit.draws[k])
    np.testing.assert_array_equal(fit.diverging, ref_div)
    assert fit.draws["mu"].std() > 0  # real draws, not a constant


KEPT = r"""
import hashlib, json, sys
from qualbayes.inference.run import configure_process
configure_process()  # the command line's process: a CPU device per chain, cache on
import jax
import numpy as np
from qualbayes.inference.run import SamplerSettings
from qualbayes.models.lot_history import fit_histories, more_draws
durations = []
jax.monitoring.register_event_duration_secs_listener(
    lambda e, secs, **k: durations.append(e))
n = np.array([80.0, 80, 125, 200, 125])
out = {}
for name, x, seed in (("first", [0, 1, 2, 0, 1], 3), ("second", [3, 0, 0, 1, 5], 4)):
    s = SamplerSettings(num_warmup=200, num_samples=200, seed=seed, retry=False)
    durations.clear()
    fit = fit_histories([(np.array(x, float), n)], s)
    fit = more_draws(fit)
    out[name] = {
        "traced": sum(e.endswith("jaxpr_trace_duration") for e in durations),
        "compiled": sum(e.endswith("backend_compile_duration") for e in durations),
        "draws": fit.draws["mu"].shape,
        "digest": hashlib.sha256(np.ascontiguousarray(fit.draws["mu"]).tobytes()
                                 + fit.diverging.tobytes()).hexdigest()}
print(json.dumps(out))
"""


def test_second_fit_of_a_shape_reuses_the_sampler_and_the_seed_fixes_the_draws(tmp_path):
    """In one process, a second fit of the same padded shape (other data, other seed) and
    its continuation trace, lower and compile nothing: the kept program serves it. Two fresh
    processes with the same seeds give identical draws (the second starts from the
    persistent cache the first filled, so loading compiled code cannot change a draw)."""
    runs = []
    for _ in range(2):
        out = subprocess.run([sys.executable, "-c", KEPT], capture_output=True, text=True,
                             env=_env(str(tmp_path / "cache")), cwd=tmp_path, timeout=900)
        assert out.returncode == 0, out.stderr[-3000:]
        runs.append(json.loads(out.stdout.strip().splitlines()[-1]))
    for got in runs:
        assert got["first"]["traced"] >= 1  # the first fit builds the sampler
        assert got["second"]["traced"] == 0 and got["second"]["compiled"] == 0, got
        assert got["second"]["draws"][:2] == [4, 400]  # 200 draws, continued by 200
        assert got["first"]["digest"] != got["second"]["digest"]
    assert runs[0]["first"]["digest"] == runs[1]["first"]["digest"]
    assert runs[0]["second"]["digest"] == runs[1]["second"]["digest"]


def test_the_command_process_collects_young_garbage_less_often_and_keeps_a_user_setting():
    """configure_process raises the youngest generation's threshold to GC_YOUNG (from
    Python's 700), keeps a higher one the process set, and leaves a disabled collector
    (threshold 0) disabled."""
    import gc

    from qualbayes.inference.run import GC_YOUNG, configure_process

    saved = gc.get_threshold()
    try:
        for before, after in ((700, GC_YOUNG), (50_000, 50_000), (0, 0)):
            gc.set_threshold(before, 10, 10)
            configure_process()
            assert gc.get_threshold() == (after, 10, 10)
    finally:
        gc.set_threshold(*saved)
