"""Benchmark: the lot-history fit of qualbayes beside general probabilistic-programming tools.

Issue 18 asks for "the same model in a general probabilistic-programming library (PyMC with
the nutpie sampler) and as a plain numpyro model, side by side on the same data: wall, ESS/s
and the ratio". This script fits one model three ways on the same simulated data:

* ``qualbayes``: :func:`qualbayes.models.lot_history.fit_histories` (marginalised
  beta-binomial, equal lots collapsed into weighted terms, terms padded to a few sizes, chains
  as a pmap over 4 CPU devices, target acceptance 0.99 as ``lots --prior history`` uses);
* ``numpyro``: the same model written as a plain numpyro model, naively: one beta-binomial
  per lot (no collapsing, no padding), tau as a ``TruncatedNormal`` with its support
  depending on mu, the same NUTS settings and chain method;
* ``nutpie``: the same model in PyMC, compiled with nutpie (numba backend) and sampled by
  nutpie's NUTS (4 chains on the machine's cores).

The model (qualbayes/models/lot_history.py and lot_spread.py), for part j and lot i:
x_ji ~ BetaBinomial(n_ji, mu_j kappa_j, (1 - mu_j) kappa_j) (p_ji marginalised),
mu_j ~ Beta(1, 1), tau_j = (kappa_j mu_j (1 - mu_j))^(-1/2) ~ HalfNormal(0.5) truncated to
tau_j >= tau_lo(mu_j) = (1e8 mu_j (1 - mu_j))^(-1/2) (kappa <= 1e8). All three sample
(logit mu, log(tau - tau_lo)): qualbayes adds the truncated half-normal density and the
Jacobian exp(y) as a factor; numpyro and PyMC get the same from their lower-bound transform
of a truncated normal with lower bound tau_lo(mu) (density phi(tau/S) / (S (1 - Phi(lo/S))),
which equals the truncated half-normal).

Draws: 4 chains x 1,000 after 1,000 warm-up, target acceptance 0.99, maximum tree depth 10,
for all three. Data: as bench/bench_speed.py (rates Beta(3, 297), i.e. mu = 1%, kappa = 300;
sample sizes 50..315; seed 1), cases ``lots:K`` (K lots of one part) and ``parts:P``
(P parts x 20 lots).

Every (case, method) runs in a fresh process with empty compilation caches (jax persistent
cache and pytensor compile directory in a new temporary folder): **cold** is the first fit
including compilation, **warm** a second identical fit in the same process (for jax, the
persistent cache written by the first fit; for nutpie the model is rebuilt and compiled again
and the sampling alone is also given). ESS is ArviZ's rank-normalised bulk ESS, the minimum
over mu_j and tau_j of every part; ESS/s is that over the warm wall. The posterior means of
mu_j and tau_j are compared with qualbayes's: z = difference / sqrt(MCSE_a^2 + MCSE_q^2)
(ArviZ ``mcse`` of the mean), and the largest |z| over parts is reported.

Run (a separate virtual environment; pymc and nutpie are not qualbayes dependencies)::

    python3 -m venv /work/venv-ppl
    /work/venv-ppl/bin/pip install pymc nutpie "jax[cpu]" numpyro arviz numpy scipy pandas
    PYTHONPATH=$PWD /work/venv-ppl/bin/python bench/bench_ppl.py            # all cases
    PYTHONPATH=$PWD /work/venv-ppl/bin/python bench/bench_ppl.py lots:100   # one case
    ... bench/bench_ppl.py --methods qualbayes,nutpie --json out.json lots:1000

Each row carries the 1-minute load average before and after its process (os.getloadavg):
the machine has 2 cores shared with other work, so timings under a high load are noisy;
ratios between methods measured at similar loads are the robust figure.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
CASES = ("lots:100", "lots:1000", "parts:10", "parts:100")
METHODS = ("qualbayes", "numpyro", "nutpie")
CHAINS, WARMUP, DRAWS, TARGET_ACCEPT, MAX_DEPTH, SEED = 4, 1000, 1000, 0.99, 10, 20261202
SCALE, KAPPA_MAX = 0.5, 1e8


def simulate(case: str, seed: int = 1) -> list[tuple[np.ndarray, np.ndarray]]:
    """[(x_j, n_j)] per part: the generator of bench/bench_speed.py (same draws, same order)."""
    kind, size = case.split(":")
    lots, parts = (int(size), 1) if kind == "lots" else (20, int(size))
    rng = np.random.default_rng(seed)
    k = lots * parts
    p = rng.beta(0.01 * 300, 0.99 * 300, size=k)
    n = rng.choice([50, 80, 125, 200, 315], size=k)
    x = rng.binomial(n, p)
    return [(x[j * lots:(j + 1) * lots].astype(float), n[j * lots:(j + 1) * lots].astype(float))
            for j in range(parts)]


# ----------------------------------------------------------------------------- the fits
def fit_qualbayes(groups):
    """qualbayes's own fit; returns mu, tau draws (chain, draw, part) and divergences."""
    from qualbayes.inference.run import SamplerSettings
    from qualbayes.models.lot_history import fit_histories

    settings = SamplerSettings(num_chains=CHAINS, num_warmup=WARMUP, num_samples=DRAWS,
                               target_accept=TARGET_ACCEPT, max_tree_depth=MAX_DEPTH,
                               seed=SEED, retry=False)
    fit = fit_histories(groups, settings)
    mu, kappa = fit.draws["mu"], fit.draws["kappa"]
    tau = 1.0 / np.sqrt(kappa * mu * (1.0 - mu))
    return {"mu": mu, "tau": tau, "divergences": int(fit.gate.divergences),
            "gate_passed": bool(fit.gate.passed)}


def numpyro_model(x, n, part, n_parts):
    """The plain model: one beta-binomial per lot, tau truncated at tau_lo(mu)."""
    import jax.numpy as jnp
    import numpyro
    import numpyro.distributions as dist

    with numpyro.plate("parts", n_parts):
        mu = numpyro.sample("mu", dist.Beta(1.0, 1.0))
        lo = 1.0 / jnp.sqrt(KAPPA_MAX * mu * (1.0 - mu))
        tau = numpyro.sample("tau", dist.TruncatedNormal(0.0, SCALE, low=lo))
    kappa = 1.0 / (mu * (1.0 - mu) * tau**2)
    a, b = (mu * kappa)[part], ((1.0 - mu) * kappa)[part]
    with numpyro.plate("lots", x.shape[0]):
        numpyro.sample("x", dist.BetaBinomial(a, b, total_count=n), obs=x)


def fit_numpyro(groups):
    import jax
    import jax.numpy as jnp
    from numpyro.infer import MCMC, NUTS

    x = jnp.asarray(np.concatenate([g[0] for g in groups]))
    n = jnp.asarray(np.concatenate([g[1] for g in groups]))
    part = jnp.asarray(np.repeat(np.arange(len(groups)), [len(g[0]) for g in groups]))
    kernel = NUTS(numpyro_model, target_accept_prob=TARGET_ACCEPT, max_tree_depth=MAX_DEPTH)
    method = "parallel" if jax.local_device_count() >= CHAINS else "vectorized"
    mcmc = MCMC(kernel, num_warmup=WARMUP, num_samples=DRAWS, num_chains=CHAINS,
                chain_method=method, progress_bar=False)
    mcmc.run(jax.random.PRNGKey(SEED), x, n, part, len(groups), extra_fields=("diverging",))
    s = mcmc.get_samples(group_by_chain=True)
    div = int(np.asarray(mcmc.get_extra_fields()["diverging"]).sum())
    return {"mu": np.asarray(s["mu"]), "tau": np.asarray(s["tau"]), "divergences": div}


def fit_nutpie(groups):
    import nutpie
    import pymc as pm
    import pytensor.tensor as pt

    x = np.concatenate([g[0] for g in groups]).astype(int)
    n = np.concatenate([g[1] for g in groups]).astype(int)
    part = np.repeat(np.arange(len(groups)), [len(g[0]) for g in groups])
    t0 = time.perf_counter()
    with pm.Model():
        mu = pm.Beta("mu", 1.0, 1.0, shape=len(groups))
        lo = 1.0 / pt.sqrt(KAPPA_MAX * mu * (1.0 - mu))
        tau = pm.TruncatedNormal("tau", mu=0.0, sigma=SCALE, lower=lo, shape=len(groups))
        kappa = 1.0 / (mu * (1.0 - mu) * tau**2)
        pm.BetaBinomial("x", alpha=(mu * kappa)[part], beta=((1.0 - mu) * kappa)[part], n=n,
                        observed=x)
        compiled = nutpie.compile_pymc_model(pm.modelcontext(None), backend="numba")
    t1 = time.perf_counter()
    idata = nutpie.sample(compiled, draws=DRAWS, tune=WARMUP, chains=CHAINS, seed=SEED,
                          progress_bar=False, target_accept=TARGET_ACCEPT, maxdepth=MAX_DEPTH)
    t2 = time.perf_counter()
    post = idata.posterior
    div = int(np.asarray(idata.sample_stats["diverging"]).sum())
    return {"mu": np.asarray(post["mu"]), "tau": np.asarray(post["tau"]), "divergences": div,
            "compile_s": t1 - t0, "sample_s": t2 - t1}


FITS = {"qualbayes": fit_qualbayes, "numpyro": fit_numpyro, "nutpie": fit_nutpie}


def summarise(out: dict) -> dict:
    """Min bulk ESS over mu_j, tau_j; posterior means and their MCSE (ArviZ)."""
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        import arviz as az

        res = {k: v for k, v in out.items() if k not in ("mu", "tau")}
        ess = []
        for name in ("mu", "tau"):
            d = np.asarray(out[name], float)
            d = d.reshape(d.shape[0], d.shape[1], -1)
            ds = az.convert_to_dataset({name: d})
            ess.append(np.asarray(az.ess(ds, method="bulk")[name]))
            res[f"{name}_mean"] = d.mean(axis=(0, 1)).tolist()
            res[f"{name}_mcse"] = np.asarray(az.mcse(ds, method="mean")[name]).tolist()
        res["min_ess_bulk"] = float(min(e.min() for e in ess))
    return res


def worker(method: str, case: str, fits: int = 2) -> dict:
    """In a fresh process: two identical fits, cold then warm (``fits=1``: cold only)."""
    groups = simulate(case)
    fit = FITS[method]
    runs = []
    for _ in range(fits):
        load = os.getloadavg()[0]
        t0 = time.perf_counter()
        out = fit(groups)
        wall = time.perf_counter() - t0
        res = summarise(out)
        res |= {"wall_s": wall, "load_before": load, "load_after": os.getloadavg()[0]}
        runs.append(res)
    return {"method": method, "case": case, "cold": runs[0], "warm": runs[-1],
            "fits": fits}


# ----------------------------------------------------------------------------- orchestration
def run_case(method: str, case: str, fits: int = 2, timeout: float | None = None) -> dict:
    with tempfile.TemporaryDirectory(prefix="bench-ppl-") as tmp:
        env = dict(os.environ, PYTHONPATH=str(ROOT), JAX_PLATFORMS="cpu", JAX_ENABLE_X64="1",
                   XLA_FLAGS=f"--xla_force_host_platform_device_count={CHAINS}",
                   JAX_COMPILATION_CACHE_DIR=str(Path(tmp) / "jax"),
                   JAX_PERSISTENT_CACHE_MIN_COMPILE_TIME_SECS="0",
                   JAX_PERSISTENT_CACHE_MIN_ENTRY_SIZE_BYTES="0",
                   PYTENSOR_FLAGS=f"compiledir={Path(tmp) / 'pytensor'}")
        t0 = time.perf_counter()
        try:
            done = subprocess.run([sys.executable, __file__, "--worker", method, case,
                                   str(fits)], env=env, capture_output=True, text=True,
                                  check=False, timeout=timeout)
        except subprocess.TimeoutExpired:
            return {"method": method, "case": case,
                    "error": f"not finished within {timeout:.0f} s (stopped)"}
        if done.returncode != 0:
            return {"method": method, "case": case, "error": done.stderr[-2000:]}
        out = json.loads(done.stdout.strip().splitlines()[-1])
        out["process_s"] = time.perf_counter() - t0
        return out


def agreement(row: dict, ref: dict) -> float:
    """Largest |difference| / combined MCSE of the posterior means of mu_j and tau_j."""
    a, q = row["warm"], ref["warm"]
    z = []
    for name in ("mu", "tau"):
        d = np.subtract(a[f"{name}_mean"], q[f"{name}_mean"])
        s = np.hypot(a[f"{name}_mcse"], q[f"{name}_mcse"])
        z.append(np.abs(d) / s)
    return float(np.max(np.concatenate(z)))


def table(rows: list[dict]) -> str:
    head = ("| case | method | cold wall (s) | warm wall (s) | min bulk ESS | ESS/s (warm) | "
            "ESS/s vs qualbayes | warm wall vs qualbayes | divergences | max z vs qualbayes | "
            "load 1-min (cold / warm) |")
    lines = [head, "|" + "---|" * 11]
    refs = {r["case"]: r for r in rows if r["method"] == "qualbayes" and "error" not in r}
    for r in rows:
        if "error" in r:
            lines.append(f"| {r['case']} | {r['method']} | failed: "
                         f"{r['error'].strip().splitlines()[-1][:120]} |" + " |" * 9)
            continue
        w, c = r["warm"], r["cold"]
        eps = w["min_ess_bulk"] / w["wall_s"]
        ref = refs.get(r["case"])
        if ref is not None:
            ref_eps = ref["warm"]["min_ess_bulk"] / ref["warm"]["wall_s"]
            ratio = f"{eps / ref_eps:.2f}"
            wall_ratio = f"{w['wall_s'] / ref['warm']['wall_s']:.2f}"
            z = "-" if r is ref else f"{agreement(r, ref):.1f}"
        else:
            ratio = wall_ratio = z = "n/a"
        warm, cold = f"{w['wall_s']:.1f}", f"{c['wall_s']:.1f}"
        if "sample_s" in w:
            warm += (f" (sampling {w['sample_s']:.1f}: "
                     f"{w['min_ess_bulk'] / w['sample_s']:.0f} ESS/s)")
            cold += f" (compile {c['compile_s']:.1f})"
        once = r.get("fits", 2) == 1
        if once:  # one fit only: ESS/s and the ratios on the cold wall
            warm, eps_text = "not run", f"{eps:.0f} (cold)"
        else:
            eps_text = f"{eps:.0f}"
        lines.append(
            f"| {r['case']} | {r['method']} | {cold} | {warm} | "
            f"{w['min_ess_bulk']:.0f} | {eps_text} | {ratio} | {wall_ratio} | "
            f"{c['divergences']} / {w['divergences']} | {z} | "
            f"{c['load_before']:.1f}-{c['load_after']:.1f} / "
            f"{w['load_before']:.1f}-{w['load_after']:.1f} |")
    return "\n".join(lines)


def main(argv: list[str]) -> None:
    if argv[:1] == ["--worker"]:
        print(json.dumps(worker(argv[1], argv[2], int(argv[3]) if len(argv) > 3 else 2)))
        return
    methods, out_json, fits, timeout = list(METHODS), None, 2, None
    args = list(argv)
    if "--fits" in args:
        i = args.index("--fits")
        fits = int(args[i + 1])
        del args[i:i + 2]
    if "--timeout" in args:
        i = args.index("--timeout")
        timeout = float(args[i + 1])
        del args[i:i + 2]
    if "--methods" in args:
        i = args.index("--methods")
        methods = args[i + 1].split(",")
        del args[i:i + 2]
    if "--json" in args:
        i = args.index("--json")
        out_json = args[i + 1]
        del args[i:i + 2]
    cases = args or list(CASES)
    started = time.perf_counter()
    rows = []
    for case in cases:
        for method in methods:
            row = run_case(method, case, fits, timeout)
            rows.append(row)
            brief = (row.get("error", "").strip().splitlines() or ["?"])[-1] if "error" in row \
                else f"cold {row['cold']['wall_s']:.1f} s, warm {row['warm']['wall_s']:.1f} s, " \
                     f"ESS {row['warm']['min_ess_bulk']:.0f}"
            print(f"{case} {method}: {brief}", file=sys.stderr, flush=True)
            if out_json:
                Path(out_json).write_text(json.dumps(rows, indent=1))
    print(table(rows))
    print(f"\n(total {time.perf_counter() - started:.0f} s)")


if __name__ == "__main__":
    main(sys.argv[1:])
