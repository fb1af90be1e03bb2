"""Benchmark of the Weibull life fit (run: python bench/bench_life.py [--units N]).

Invented data: N units (default 100,000), Weibull shape 2 and scale 1,000 h, each with an
exponential removal time tuned so that about 70% are suspensions; times are continuous
(no two alike, so merging identical times does not help). The fit is the one the ``life``
command runs: posterior mode and Laplace covariance (scipy), then NUTS with 4 chains x
1,000 draws after 1,000 warm-up iterations, vectorised chains, float64.

Printed: wall time of the whole fit (mode + NUTS, compilation included), the sampling
time alone when run again in the same process (compiled code reused), minimum bulk ESS
over log shape, log scale and R(mission), ESS per second, and the scipy censored MLE
fit (``weibull_min.fit(CensoredData(...), floc=0)``) on the same data as a reference point.
The jax persistent compilation cache (QUALBAYES_JAX_CACHE) is used as the command uses it:
its state (cold or warm) is printed.
"""

from __future__ import annotations

import argparse
import os
import time
from pathlib import Path

import numpy as np
from scipy import stats


def make_data(n: int, seed: int = 2026):
    rng = np.random.default_rng(seed)
    life = 1000.0 * rng.weibull(2.0, size=n)
    removal = rng.exponential(600.0, size=n)  # about 70% removed before failing
    failed = life <= removal
    return np.where(failed, life, removal), failed


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--units", type=int, default=100_000)
    ap.add_argument("--mission", type=float, default=500.0)
    ap.add_argument("--extra", action="append", default=[],
                    help="keyword of assess_life to switch on for the end-to-end timing "
                         "(e.g. compare_models, check_fit)")
    args = ap.parse_args()
    os.environ.setdefault("CI", "true")

    from qualbayes.inference.run import SamplerSettings, configure_process
    configure_process()
    cache = os.environ.get("QUALBAYES_JAX_CACHE",
                           str(Path.home() / ".cache" / "qualbayes" / "jax"))
    cache_state = ("warm" if Path(cache).is_dir() and any(Path(cache).iterdir())
                   else "cold") if cache.lower() != "off" else "off"

    t, failed = make_data(args.units)
    rows = []
    t0 = time.perf_counter()
    from qualbayes.models.life import fit_life
    from qualbayes.models.weibull import LifePrior, group_stats, posterior_mode
    import_s = time.perf_counter() - t0

    prior = LifePrior()
    settings = SamplerSettings(num_chains=4, num_warmup=1000, num_samples=1000)
    for label in ("first fit (incl. compile)", "second fit (same process)"):
        t0 = time.perf_counter()
        st = group_stats(t[failed], t[~failed])
        mode = posterior_mode(st, prior)
        t_mode = time.perf_counter() - t0
        fit = fit_life([st], [mode], prior, settings, ["bench"], args.mission)
        wall = time.perf_counter() - t0
        ess = fit.gate.min_ess_bulk
        rows.append((label, wall, t_mode, ess, ess / wall, fit.gate.max_rhat,
                     fit.gate.divergences, fit.gate.attempts))

    t0 = time.perf_counter()
    data = stats.CensoredData(uncensored=t[failed], right=t[~failed])
    c, _, scale = stats.weibull_min.fit(data, floc=0)
    t_mle = time.perf_counter() - t0

    beta = np.exp(fit.draws["log_shape"]).ravel()
    eta = np.exp(fit.draws["log_scale"]).ravel()
    print(f"units {args.units:,}, suspensions {np.mean(~failed):.1%}, 4 chains x 1,000 draws "
          f"(1,000 warm-up), jax cache {cache_state}, import of the sampler path {import_s:.1f} s")
    head = (f"{'run':<28}{'wall s':>8}{'mode s':>8}{'min bulk ESS':>14}{'ESS/s':>9}"
            f"{'max R-hat':>11}{'diverg.':>9}{'attempts':>10}")
    print(head)
    print("-" * len(head))
    for r in rows:
        print(f"{r[0]:<28}{r[1]:>8.2f}{r[2]:>8.2f}{r[3]:>14.0f}{r[4]:>9.0f}{r[5]:>11.4f}"
              f"{r[6]:>9d}{r[7]:>10d}")
    print(f"{'scipy censored MLE fit':<28}{t_mle:>8.2f}")
    print(f"posterior median shape {np.median(beta):.4f}, scale {np.median(eta):.1f}; "
          f"scipy MLE shape {c:.4f}, scale {scale:.1f}; true shape 2, scale 1000")
    print("target: wall < 8 s, min bulk ESS >= 1,000")
    print(assess_timing(t, failed, args.mission, args.extra))


def assess_timing(t, failed, mission: float, extra: list[str]) -> str:
    """Wall time of the whole ``life`` question (``assess_life``: fit, summaries, notes and
    the default add-ons) on the same units, read from a CSV as the command reads them."""
    import tempfile

    import pandas as pd

    from qualbayes.data.life import read_life
    from qualbayes.life_question import assess_life

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "units.csv"
        pd.DataFrame({"unit": np.arange(t.size), "time": t,
                      "status": np.where(failed, "F", "S")}).to_csv(path, index=False)
        table = read_life(path)
    kwargs = {name: True for name in extra}
    t0 = time.perf_counter()
    res = assess_life(table, mission, 0.9, 0.9, **kwargs)
    wall = time.perf_counter() - t0
    return (f"assess_life end to end ({', '.join(extra) or 'default options'}): {wall:.2f} s, "
            f"decision {res.groups[0]['decision']}")


if __name__ == "__main__":
    main()
