"""First-ever run against a warm run, in fresh processes, for the commands that compile.

For each command line: a new empty jax compilation cache folder (``QUALBAYES_JAX_CACHE``),
then the command in a fresh interpreter twice: the first-ever run (empty cache) and a warm
run (the cache the first run left). With ``--prepare`` the one-off ``qualbayes prepare`` runs
first on the empty cache (as after installation) and its own time is reported. jax logs every
compilation (``JAX_LOG_COMPILES=1``); the table counts them, the persistent-cache hits and the
seconds spent tracing, lowering and in XLA compilation (loads from the cache included), and
gives the ratio first / warm. Timings are noisy on a shared 2-core machine: read the ratios
of one table, measured back to back, and the load average printed with it.

    PYTHONPATH=$PWD python bench/bench_first_run.py [--prepare] [--only demo]

``--model-compile`` instead measures, in one process, what compiling NUTS for the lots
history model costs with numpyro's ``BetaBinomial.log_prob``, with the short ``gammaln``
form ``qualbayes.models.beta_binomial.log_pmf`` (nine log-gammas) and with the model as
shipped (``log_kernel``: six log-gammas in one call, without the binomial coefficient)
(same hyperprior, same data, one chain; compile = first run minus a second run of the same
compiled sampler; CPU seconds of this process, which load disturbs less than wall time), and
the length of each gradient program.

``--compile-flags [--variant=FLAGS ...]`` measures, in a fresh process per variant and without a
persistent cache, the CPU seconds of a first fit (compiling included) and of a fit once
compiled for the one-part sampler that the parts path uses, under each XLA_FLAGS variant
(default: the compiler as shipped against ``--xla_cpu_use_fusion_emitters=false``).
"""

from __future__ import annotations

import argparse
import json
import os
import re
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
EX = ROOT / "example_lots"
CASES = {
    "demo: lots xlsx --prior history": ["lots", str(EX / "incoming_inspection.xlsx"), "--spec",
                                        "1%", "--prior", "history"],
    "lots csv --prior history": ["lots", str(EX / "incoming_inspection.csv"), "--spec", "2%",
                                 "--prior", "history"],
    "life": ["life", str(EX / "sv30_rig_test.csv"), "--mission", "2000", "--target", "0.9"],
}
_XLA = re.compile(r"Finished XLA compilation of (\S+) in ([\d.]+) sec")
_TRACE = re.compile(r"Finished tracing \S+ for jit in ([\d.]+) sec")
_LOWER = re.compile(r"Finished jaxpr to MLIR module conversion \S+ in ([\d.]+) sec")


def run(argv: list[str], cache: str) -> dict:
    env = {k: v for k, v in os.environ.items() if not k.startswith(("JAX_", "XLA_"))}
    env |= {"PYTHONPATH": str(ROOT), "QUALBAYES_JAX_CACHE": cache, "JAX_LOG_COMPILES": "1"}
    load = os.getloadavg()[0]
    with tempfile.TemporaryDirectory() as work:
        t = time.perf_counter()
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        out = subprocess.run([sys.executable, "-m", "qualbayes", *argv], capture_output=True,
                             text=True, env=env, cwd=work)
        wall = time.perf_counter() - t
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime + after.ru_stime) - (before.ru_utime + before.ru_stime)
    if out.returncode != 0:
        raise SystemExit(f"{argv}: exit {out.returncode}\n{out.stderr[-2000:]}")
    log = out.stderr
    xla = [(name, float(s)) for name, s in _XLA.findall(log)]
    big = [s for name, s in xla if s >= 0.5]
    hits = log.count("Persistent compilation cache hit")
    return {"load": f"{load:.1f}-{os.getloadavg()[0]:.1f}", "wall": wall, "cpu": cpu,
            "compiles": len(xla), "hits": hits,
            "xla": sum(s for _, s in xla), "big": len(big),
            "trace": sum(map(float, _TRACE.findall(log))) + sum(map(float,
                                                                    _LOWER.findall(log)))}


FLAG_RUN = r"""
import json, os, resource, time
from qualbayes.inference.run import configure_process
configure_process()
import jax, jax.numpy as jnp, numpy as np
from qualbayes.models import lot_history_parts as lp
from qualbayes.models.lot_history import lot_history_model, pad
compiled = []
jax.monitoring.register_event_duration_secs_listener(
    lambda e, s, **k: compiled.append(s) if e.endswith("backend_compile_duration") else None)
def cpu():
    r = resource.getrusage(resource.RUSAGE_SELF)
    return r.ru_utime + r.ru_stime
rng = np.random.default_rng(7)
n = rng.choice([80.0, 125.0, 200.0], 14)
xs, ns, ws = pad([(rng.binomial(n.astype(int), 0.01).astype(float), n)])
out = {"load": os.getloadavg()[0]}
with jax.enable_x64(True):
    args = (jnp.asarray(xs), jnp.asarray(ns), jnp.asarray(ws))
    c = cpu()
    run, _ = lp._compiled(lot_history_model, 0.5, 1000, 1000, 0.99, 10, True, 4)
    mu = run(1, np.arange(1), *args)[0]
    out |= {"first": cpu() - c, "compile_wall": sum(compiled)}
    c = cpu()
    for seed in (2, 3):
        mu = run(seed, np.arange(1), *args)[0]
    out |= {"sample": (cpu() - c) / 2, "mu": float(np.mean(mu))}
print(json.dumps(out))
"""


def compile_flags(variants: list[str]) -> None:
    """The one-part history sampler (the parts path's program, 4 chains, 1,000 + 1,000) in a
    fresh process per XLA_FLAGS variant, no persistent cache: CPU seconds of the first fit
    (compiling included), XLA compile wall seconds, CPU seconds of a fit once compiled."""
    print("| XLA_FLAGS added | first fit CPU (s) | XLA compile wall (s) | "
          "fit once compiled, CPU (s) | mean of mu | load 1-min |")
    print("|---|---|---|---|---|---|")
    for flags in variants:
        env = {k: v for k, v in os.environ.items() if not k.startswith(("JAX_", "XLA_"))}
        env |= {"PYTHONPATH": str(ROOT), "QUALBAYES_JAX_CACHE": "off",
                "XLA_FLAGS": flags or "--xla_cpu_use_fusion_emitters=true"}
        out = subprocess.run([sys.executable, "-c", FLAG_RUN], capture_output=True,
                             text=True, env=env)
        if out.returncode != 0:
            print(f"| {flags} | failed: {out.stderr.strip()[-200:]} |||||")
            continue
        r = json.loads(out.stdout.strip().splitlines()[-1])
        print(f"| {flags or '(none: fusion emitters on)'} | {r['first']:.1f} | "
              f"{r['compile_wall']:.1f} | {r['sample']:.2f} | {r['mu']:.12f} | "
              f"{r['load']:.1f} |", flush=True)


def model_compile() -> None:
    import resource  # noqa: PLC0415

    import jax  # noqa: PLC0415
    import jax.numpy as jnp  # noqa: PLC0415
    import numpy as np  # noqa: PLC0415
    import numpyro  # noqa: PLC0415
    from numpyro.infer import MCMC, NUTS  # noqa: PLC0415
    from numpyro.infer.util import initialize_model  # noqa: PLC0415

    from qualbayes.models import lot_history as lh  # noqa: PLC0415
    from qualbayes.models.beta_binomial import log_pmf  # noqa: PLC0415

    jax.config.update("jax_enable_x64", True)  # a benchmark process of its own

    def short_model(x, n, w, scale):
        mu, kappa = lh.hyperprior_sites(x.shape[0], scale)
        numpyro.factor("x", jnp.sum(w * log_pmf(x, n, mu * kappa, (1.0 - mu) * kappa)))

    def numpyro_model(x, n, w, scale):
        mu, kappa = lh.hyperprior_sites(x.shape[0], scale)
        bb = numpyro.distributions.BetaBinomial(mu * kappa, (1.0 - mu) * kappa, n)
        numpyro.factor("x", jnp.sum(w * bb.log_prob(x)))

    def cpu() -> float:
        r = resource.getrusage(resource.RUSAGE_SELF)
        return r.ru_utime + r.ru_stime

    rng = np.random.default_rng(3)
    n = rng.choice([80.0, 125.0, 200.0], 20)
    xs, ns, ws = lh.pad([(rng.binomial(n.astype(int), 0.01).astype(float), n)])
    args = (jnp.asarray(xs), jnp.asarray(ns), jnp.asarray(ws), jnp.asarray(0.5))
    print(f"load average before: {os.getloadavg()[0]:.1f}")
    compiled: list[float] = []

    def listen(event: str, seconds: float, **_) -> None:
        if event.endswith("backend_compile_duration"):
            compiled.append(seconds)

    jax.monitoring.register_event_duration_secs_listener(listen)
    print("| lots history likelihood | gradient program (lines) | NUTS run 1: CPU s | "
          "of which XLA compiling (wall s) | NUTS run 2: CPU s | compiling (wall s) |")
    print("|---|---|---|---|---|---|")
    for label, model in (("numpyro BetaBinomial.log_prob", numpyro_model),
                         ("nine gammaln calls (beta_binomial.log_pmf)", short_model),
                         ("one gammaln call (beta_binomial.log_kernel, shipped)",
                          lh.lot_history_model)):
        info = initialize_model(jax.random.PRNGKey(0), model, model_args=args)
        lines = jax.jit(jax.grad(info.potential_fn)).lower(
            info.param_info.z).as_text().count("\n")
        mcmc = MCMC(NUTS(model, target_accept_prob=0.99), num_warmup=1000, num_samples=1000,
                    num_chains=1, progress_bar=False, jit_model_args=True)
        runs = []
        for seed in (1, 2):
            c = cpu()
            compiled.clear()
            mcmc.run(jax.random.PRNGKey(seed), *args)
            mcmc.get_samples()["mu"].block_until_ready()
            runs.append(f"{cpu() - c:.1f} | {sum(compiled):.1f}")
        print(f"| {label} | {lines} | {runs[0]} | {runs[1]} |")
    print(f"load average after: {os.getloadavg()[0]:.1f}")


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--prepare", action="store_true",
                        help="run `qualbayes prepare` on the empty cache first")
    parser.add_argument("--only", help="run only the cases whose name contains this")
    parser.add_argument("--repeat", type=int, default=1,
                        help="first-ever and warm pairs per case (each on a new empty cache)")
    parser.add_argument("--compile-flags", action="store_true",
                        help="compile and sampling cost of the one-part history sampler "
                             "under each --variant of XLA_FLAGS")
    parser.add_argument("--variant", action="append", metavar="FLAGS",
                        help="with --compile-flags: XLA_FLAGS to try, written "
                             "--variant=--xla_...; '--variant=' is the default compiler "
                             "(default: both with and without the fusion emitters)")
    parser.add_argument("--model-compile", action="store_true",
                        help="compile cost of the lots history likelihood, two forms")
    opts = parser.parse_args()
    if opts.model_compile:
        model_compile()
        return
    if opts.compile_flags:
        compile_flags(opts.variant or ["", "--xla_cpu_use_fusion_emitters=false"])
        return
    print(f"load average before: {os.getloadavg()[0]:.1f}")
    print("| command | run | wall (s) | CPU (s) | compilations (>= 0.5 s) | "
          "persistent-cache hits | XLA compile or load (s) | tracing + lowering (s) | "
          "first / warm: wall, CPU | load 1-min (start-end) |")
    print("|---|---|---|---|---|---|---|---|---|---|")
    for name, argv in CASES.items():
        if opts.only and opts.only not in name:
            continue
        for _ in range(opts.repeat):
            pair(name, argv, opts.prepare)
    print(f"load average after: {os.getloadavg()[0]:.1f}")


def pair(name: str, argv: list[str], prepare: bool) -> None:
    """One first-ever run on a new empty cache, then a warm run on what it left."""
    with tempfile.TemporaryDirectory() as cache:
        if prepare:
            r = run(["prepare"], cache)
            print(f"| qualbayes prepare | once, empty cache | {r['wall']:.1f} | "
                  f"{r['cpu']:.1f} | {r['compiles']} ({r['big']}) | {r['hits']} | "
                  f"{r['xla']:.1f} | {r['trace']:.1f} | | {r['load']} |", flush=True)
        first = run(argv, cache)
        warm = run(argv, cache)
    label = "first after prepare" if prepare else "first-ever"
    for run_name, r in ((label, first), ("warm", warm)):
        ratio = (f"{first['wall'] / warm['wall']:.2f}, {first['cpu'] / warm['cpu']:.2f}"
                 if r is warm else "")
        print(f"| {name} | {run_name} | {r['wall']:.1f} | {r['cpu']:.1f} | "
              f"{r['compiles']} ({r['big']}) | {r['hits']} | {r['xla']:.1f} | "
              f"{r['trace']:.1f} | {ratio} | {r['load']} |", flush=True)


if __name__ == "__main__":
    main()
