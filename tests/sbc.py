"""Simulation-based calibration (Talts, Betancourt, Simpson, Vehtari & Gelman, 2018,
"Validating Bayesian inference algorithms with simulation-based calibration",
arXiv:1804.06788) for the hierarchical lot model.

Each replication draws (mu, phi) from the prior, lot rates and defect counts from the
model, and is fitted; the rank of the true value among L thinned posterior draws is then
uniform on 0..L when the model, the likelihood and the sampler are right. All replications
are fitted at once: the model's plate over part numbers makes each replication one "part",
so one NUTS run (one compilation) serves them all.

Used by tests/test_calibration.py and by bench/calibration.py (which prints the table in
docs/calibration.md).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import stats

SAMPLE_SIZES = (32, 50, 80, 125, 200, 315)  # inspection sample sizes of the simulated lots


@dataclass
class Simulated:
    mu: np.ndarray  # (R,)
    phi: np.ndarray  # (R,)
    groups: list[tuple[np.ndarray, np.ndarray]]  # per replication: (x, n) of its lots

    @property
    def log_kappa(self) -> np.ndarray:
        return np.log(1.0 / self.phi**2 - 1.0)


def simulate(replications: int, lots: int, seed: int) -> Simulated:
    """Parameters from the model's prior (the default history hyperprior), data from the
    model."""
    from qualbayes.models.lot_spread import HistoryPrior

    rng = np.random.default_rng(seed)
    mu, kappa = HistoryPrior().sample(replications, rng)
    phi = 1.0 / np.sqrt(kappa + 1.0)
    groups = []
    for r in range(replications):
        n = rng.choice(SAMPLE_SIZES, size=lots).astype(float)
        p = rng.beta(mu[r] * kappa[r], (1.0 - mu[r]) * kappa[r], size=lots)
        groups.append((rng.binomial(n.astype(int), p).astype(float), n))
    return Simulated(mu, phi, groups)


@dataclass
class Calibration:
    """Ranks and coverage of one SBC study."""

    name: str
    replications: int
    lots: int
    thinned_draws: int
    ranks: dict[str, np.ndarray]  # parameter -> (R,) ranks in 0..L
    covered: dict[str, dict[float, np.ndarray]]  # parameter -> level -> (R,) bool
    gate_passed: int
    divergences: int
    extra: dict = field(default_factory=dict)

    def chi_square(self, name: str, bins: int = 10) -> tuple[float, float]:
        """Chi-square statistic and p-value of the ranks binned into ``bins`` equal bins."""
        counts = np.bincount(self.ranks[name] * bins // (self.thinned_draws + 1),
                             minlength=bins)
        res = stats.chisquare(counts)
        return float(res.statistic), float(res.pvalue)

    def coverage(self, name: str, level: float) -> float:
        return float(np.mean(self.covered[name][level]))


#: The calibration checks of tests/test_calibration.py: 10 studies that must pass (3 in CI,
#: 7 slow), 2 parameters each, 3 checks a parameter (rank chi-square, 50% and 90% coverage).
#: Each check is made at FAMILY_ALPHA / CHECKS (Bonferroni), so that a correct model fails
#: the whole set by chance at most FAMILY_ALPHA of the time.
FAMILY_ALPHA, CHECKS = 0.001, 60
PER_CHECK = FAMILY_ALPHA / CHECKS


def coverage_band(replications: int, level: float, tail: float = PER_CHECK / 2
                  ) -> tuple[float, float]:
    """Central binomial band for the fraction of intervals covering the truth: the
    number covering is Binomial(R, level) when the intervals are calibrated; each tail
    holds ``tail`` (by default half the per-check false-alarm rate)."""
    lo = stats.binom.ppf(tail, replications, level) / replications
    hi = stats.binom.ppf(1 - tail, replications, level) / replications
    return float(lo), float(hi)


def ranks_and_coverage(draws: dict, truth: dict, thinned: int, levels) -> tuple[dict, dict]:
    """Per parameter: the rank of the truth among ``thinned`` evenly spaced draws, and
    whether each central interval at ``levels`` covers it. ``draws[k]`` has shape
    (chain, draw, R), ``truth[k]`` shape (R,)."""
    ranks, covered = {}, {}
    for key, d in draws.items():
        flat = d.reshape(-1, d.shape[-1])  # (chains * draws, R)
        pick = np.linspace(0, flat.shape[0] - 1, thinned).round().astype(int)
        ranks[key] = np.sum(flat[pick] < truth[key][None, :], axis=0)
        covered[key] = {}
        for level in levels:
            lo, hi = np.quantile(flat, [(1 - level) / 2, (1 + level) / 2], axis=0)
            covered[key][level] = (lo <= truth[key]) & (truth[key] <= hi)
    return ranks, covered


def run(sim: Simulated, settings, model=None, name: str = "lot history",
        thinned: int = 99, levels=(0.5, 0.9)) -> Calibration:
    """Fit every replication in one run and rank the truth among ``thinned`` draws."""
    from qualbayes.models.lot_history import fit_histories, lot_history_model

    model = model or lot_history_model
    names = [f"r{r}" for r in range(len(sim.mu))]
    fit = fit_histories(sim.groups, settings, names=names, model=model)
    truth = {"mu": sim.mu, "log_kappa": sim.log_kappa}
    draws = {"mu": fit.draws["mu"], "log_kappa": np.log(fit.draws["kappa"])}
    ranks, covered = ranks_and_coverage(draws, truth, thinned, levels)
    passed = sum(fit.gate.select(nm).passed for nm in names)
    return Calibration(name, len(sim.mu), len(sim.groups[0][0]), thinned, ranks, covered,
                       passed, fit.gate.divergences,
                       {"min_ess_bulk": fit.gate.min_ess_bulk, "max_rhat": fit.gate.max_rhat})


def pooled_binomial_model(x, n, w=None, scale=None):
    """A deliberately wrong likelihood for the test of the test: the lot-to-lot variation is
    dropped (x ~ Binomial(n, mu), as if every lot had the part's mean rate), the kind of
    slip that drops a term. mu and kappa keep their names and priors."""
    import numpyro
    import numpyro.distributions as dist

    from qualbayes.models.lot_history import hyperprior_sites

    mu, _ = hyperprior_sites(x.shape[0], scale)
    weight = (n > 0) if w is None else w
    numpyro.factor("x", (weight * dist.Binomial(total_count=n, probs=mu).log_prob(x)).sum())


def markdown_rows(cal: Calibration) -> list[str]:
    rows = []
    for key in cal.ranks:
        stat, p = cal.chi_square(key)
        c50, c90 = cal.coverage(key, 0.5), cal.coverage(key, 0.9)
        b50, b90 = coverage_band(cal.replications, 0.5), coverage_band(cal.replications, 0.9)
        shown = f"{p:.3f}" if p >= 0.0005 else f"{p:.1e}"
        rows.append(f"| {cal.name} | {key} | {cal.replications} | {cal.lots} | "
                    f"{stat:.1f} | {shown} | {c50:.3f} ({b50[0]:.3f}-{b50[1]:.3f}) | "
                    f"{c90:.3f} ({b90[0]:.3f}-{b90[1]:.3f}) | {cal.gate_passed}/"
                    f"{cal.replications} | {cal.divergences} |")
    return rows


TABLE_HEADER = [
    "| study | parameter | replications | lots or units each | chi-square (9 df) | p-value | "
    "50% coverage (band) | 90% coverage (band) | gate passed | divergences |",
    "| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |",
]


# ----------------------------------------------------------------------------- Weibull life

#: Prior of the Weibull studies: shape between 0.9 and 3.6, B10 life between 300 and 3000 h
#: (central 95% each, lognormal); both proper and free of the data, as SBC requires.
WEIBULL_SHAPE_RANGE = (0.9, 3.6)
WEIBULL_B10_RANGE = (300.0, 3000.0)


def weibull_prior():
    from qualbayes.models.weibull import make_prior

    lo, hi = WEIBULL_SHAPE_RANGE
    b_lo, b_hi = WEIBULL_B10_RANGE
    return make_prior(shape=f"{lo},{hi}", blife=f"10:{b_lo:g},{b_hi:g}")


@dataclass
class SimulatedLife:
    log_shape: np.ndarray  # (R,)
    log_scale: np.ndarray  # (R,)
    units: list[dict]  # per replication: failures, suspensions, interval_lower/upper, left


def simulate_life(replications: int, units: int, seed: int, end: float = 2000.0,
                  inspections: tuple[float, ...] = ()) -> SimulatedLife:
    """(shape, B10) from the prior, lives from the Weibull; every unit is on test to
    ``end``. Without ``inspections`` failures are seen at once (exact) and survivors are
    suspended at ``end``; with them, a unit is only checked at those times: failed at the
    first check -> left-censored, later -> interval-censored between two checks."""
    prior = weibull_prior()
    rng = np.random.default_rng(seed)
    m_b, s_b = prior.shape
    q, m_l, s_l = prior.scale_args
    log_shape = rng.normal(m_b, s_b, replications)
    log_b10 = rng.normal(m_l, s_l, replications)
    beta = np.exp(log_shape)
    log_scale = log_b10 - np.log(-np.log1p(-q)) / beta
    out = []
    for r in range(replications):
        t = np.exp(log_scale[r]) * rng.weibull(beta[r], units)
        if not inspections:
            out.append({"failures": t[t <= end], "suspensions": np.full((t > end).sum(), end)})
            continue
        checks = np.asarray(inspections, float)
        failed = t <= checks[-1]
        k = np.searchsorted(checks, t[failed])  # first check at or after the failure
        lower = np.where(k > 0, checks[np.maximum(k - 1, 0)], 0.0)
        upper = checks[k]
        out.append({"failures": np.zeros(0), "left": upper[lower == 0],
                    "interval_lower": lower[lower > 0], "interval_upper": upper[lower > 0],
                    "suspensions": np.full((~failed).sum(), checks[-1])})
    return SimulatedLife(log_shape, log_scale, out)


def life_stats(units: dict, drop_suspensions: bool = False):
    """GroupStats of one replication. ``drop_suspensions`` gives the deliberately wrong
    likelihood of the test of the test: the suspension terms log S(t) are left out (the
    reference time stays that of the full data)."""
    import dataclasses

    from qualbayes.models.weibull import group_stats

    st = group_stats(units["failures"], units["suspensions"], units.get("interval_lower", ()),
                     units.get("interval_upper", ()), units.get("left", ()))
    if not drop_suspensions:
        return st
    d, w = np.unique(np.log(units["failures"]) - st.log_tref, return_counts=True)
    return dataclasses.replace(st, d_exposed=d, w_exposed=w.astype(float))


def run_life(sim: SimulatedLife, settings, name: str = "Weibull", drop_suspensions=False,
             thinned: int = 99, levels=(0.5, 0.9)) -> Calibration:
    from qualbayes.models.life import fit_life
    from qualbayes.models.weibull import posterior_mode

    prior = weibull_prior()
    stats_ = [life_stats(u, drop_suspensions) for u in sim.units]
    modes = [posterior_mode(st, prior) for st in stats_]
    names = [f"r{r}" for r in range(len(stats_))]
    fit = fit_life(stats_, modes, prior, settings, names, mission=1000.0)
    truth = {"log_shape": sim.log_shape, "log_scale": sim.log_scale}
    ranks, covered = ranks_and_coverage({k: fit.draws[k] for k in truth}, truth, thinned,
                                        levels)
    passed = sum(fit.gate.select(nm).passed for nm in names)
    return Calibration(name, len(stats_), stats_[0].units, thinned, ranks, covered, passed,
                       fit.gate.divergences, {"min_ess_bulk": fit.gate.min_ess_bulk,
                                              "max_rhat": fit.gate.max_rhat})
