"""Cost of the quadrature cross-check (qualbayes.cross_check) alone, on 1,000 lots of one
part and on a 3-group Weibull life file (invented data). The NUTS draws are stood in for by
4 chains x 1,000 draws resampled from the grid posterior itself (the check's cost depends
on the draws' number, not on how they were made), so the check must also agree.

    PYTHONPATH=$PWD python bench/bench_cross_check.py
"""

from __future__ import annotations

import time

import numpy as np

from qualbayes import cross_check
from qualbayes.models import lot_history_grid as lg
from qualbayes.models import weibull_grid as wg
from qualbayes.models.lot_spread import HistoryPrior
from qualbayes.models.weibull import LifePrior, group_stats, posterior_mode


def _timed(f, repeat=3):
    best = np.inf
    for _ in range(repeat):
        t = time.perf_counter()
        out = f()
        best = min(best, time.perf_counter() - t)
    return best, out


def lots_case(k: int, rng) -> tuple[float, dict]:
    n = rng.choice([50, 80, 125, 200, 315], size=k).astype(float)
    x = rng.binomial(n.astype(int), rng.beta(2.0, 400.0, size=k)).astype(float)
    prior = HistoryPrior()
    g = lg.posterior_grid(x, n, prior=prior)
    pick = rng.choice(g.weight.size, size=4000, p=g.weight)
    mu, kappa = g.mu[pick].reshape(4, 1000), g.kappa[pick].reshape(4, 1000)
    return _timed(lambda: cross_check.lot_group(mu, kappa, x, n, 0.01, prior))


def sensitivity_case(k: int, rng):
    import pandas as pd  # noqa: PLC0415

    from qualbayes.history_sensitivity import spread_sensitivity  # noqa: PLC0415

    n = rng.choice([50, 80, 125, 200, 315], size=k)
    frame = pd.DataFrame({"lot": np.arange(k), "part": "P",
                          "defectives": rng.binomial(n, rng.beta(2.0, 400.0, size=k)),
                          "inspected": n, "lot_size": pd.array(n * 10, dtype="Int64"),
                          "decision_basis": "lot"})
    return _timed(lambda: spread_sensitivity(frame, 0.01, 0.95), repeat=1)


def life_case(rng) -> tuple[float, list[dict]]:
    prior = LifePrior()
    groups = []
    for shape, scale, units in ((1.8, 900.0, 30), (2.5, 1400.0, 25), (1.2, 3000.0, 40)):
        t = scale * rng.weibull(shape, size=units)
        fail, susp = t[t < 1200.0], np.full(int((t >= 1200.0).sum()), 1200.0)
        st = group_stats(fail, susp)
        mode = posterior_mode(st, prior)
        g = wg.posterior_grid(st, prior, mode)
        w = (g.dens / g.dens.sum()).ravel()
        pick = rng.choice(w.size, size=4000, p=w)
        i, j = np.unravel_index(pick, g.dens.shape)
        b = g.b[i]
        u = g.u0 + g.slope * (b - g.b0) + g.sd_u * g.z[j]
        log_scale = st.log_tref - u / np.exp(b)
        groups.append((st, mode, b.reshape(4, 1000), log_scale.reshape(4, 1000)))

    def run():
        return [cross_check.life_group(st, prior, mode, b, ls, 300.0, 0.9)
                for st, mode, b, ls in groups]
    return _timed(run)


def main() -> None:
    rng = np.random.default_rng(2026)
    print("| case | distinct terms / groups | cross-check wall (best of 3) | agreed | max diff |")
    print("|---|---|---|---|---|")
    for k in (20, 1000):
        sec, c = lots_case(k, rng)
        print(f"| lots, {k} lots of one part | {c['quantities'] - 1} terms | {sec:.3f} s | "
              f"{c['agreed']} | {c['max_abs_diff']:.2g} |")
    sec, frame = sensitivity_case(1000, rng)
    print(f"| lots --sensitivity spread rows by quadrature, 1000 lots, S = 0.25/0.5/1 | "
          f"{frame['group'].nunique()} group | {sec:.3f} s | (no draws) | - |")
    sec, cs = life_case(rng)
    print(f"| life, 3 groups | 3 | {sec:.3f} s | {all(c['agreed'] for c in cs)} | "
          f"{max(c['max_abs_diff'] for c in cs):.2g} |")


if __name__ == "__main__":
    main()
