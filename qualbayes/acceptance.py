"""Lot acceptance: from validated lots to a decision per lot (the API behind ``lots``)."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from qualbayes.data.lots import LotTable
from qualbayes.models import lots as conj
from qualbayes.models import mixtures
from qualbayes.models.priors import HISTORY, BetaPrior
from qualbayes.questions import ACCEPT, NOT_CONVERGED, UNDECIDED, decide

MIN_WEIGHT_ESS = 200.0  # below this the reweighted extra-units count is not trusted

RESULT_COLUMNS = [
    "posterior_mean", "interval_low", "interval_high", "upper_bound", "prob_within_spec",
    "decision", "extra_clean_units_to_accept", "remaining_units",
    "remaining_defectives_median", "remaining_defectives_upper",
]


@dataclass
class LotAssessment:
    """Everything the lots question produced; ``lots`` has one row per lot."""

    lots: pd.DataFrame
    spec: float
    confidence: float
    prior: str
    model: str
    seed: int | None
    diagnostics: dict[str, dict] = field(default_factory=dict)  # part -> gate dict
    next_lot: dict[str, dict] = field(default_factory=dict)  # part -> predictive summary
    notes: list[str] = field(default_factory=list)
    prior_params: dict | None = None  # {"a": ..., "b": ...} for the conjugate priors
    draws: dict[str, dict] = field(default_factory=dict)  # part -> {"mu", "kappa"} (chain, draw)
    sampler: dict = field(default_factory=dict)

    @property
    def converged(self) -> bool:
        return all(d["passed"] for d in self.diagnostics.values())


MODEL_CONJUGATE = ("x ~ Binomial(n, p); p ~ Beta(a, b); posterior p | x ~ Beta(a + x, b + n - x) "
                   "(closed form)")
MODEL_HISTORY = ("x_i ~ Binomial(n_i, p_i); p_i ~ Beta(mu*kappa, (1-mu)*kappa); mu ~ Beta(1,1); "
                 "phi = 1/sqrt(kappa+1) ~ Uniform(1e-4, 1); p_i marginalised, NUTS on (mu, phi), "
                 "p_i | mu, kappa, x_i ~ Beta(mu*kappa + x_i, (1-mu)*kappa + n_i - x_i); "
                 "one model per part number")


def assess_lots(table: LotTable, spec: float, confidence: float = 0.95,
                prior: BetaPrior | str = "uniform", seed: int = 20261202,
                settings=None) -> LotAssessment:
    """Answer "is P(p <= spec | data) >= confidence?" for every lot."""
    if isinstance(prior, str) and prior != HISTORY:
        from qualbayes.models.priors import parse_lot_prior  # noqa: PLC0415

        prior = parse_lot_prior(prior)
    frame = table.frame.copy()
    if prior == HISTORY:
        return _assess_history(frame, spec, confidence, seed, settings)
    assert isinstance(prior, BetaPrior)
    a_post, b_post = conj.posterior(frame["defectives"], frame["inspected"], prior.a, prior.b)
    summary = conj.summarise(a_post, b_post, spec, confidence)
    for key, values in summary.items():
        frame[key] = values
    frame["decision"] = [decide(p, confidence) for p in frame["prob_within_spec"]]
    frame["extra_clean_units_to_accept"] = [
        _extra_conjugate(d, a, b, spec, confidence)
        for d, a, b in zip(frame["decision"], a_post, b_post, strict=True)]
    approximate = _add_remaining(frame, a_post, b_post, confidence)
    return LotAssessment(frame[_columns(frame)], spec, confidence, prior.describe(),
                         MODEL_CONJUGATE, None, notes=_approximate_note(approximate),
                         prior_params={"a": prior.a, "b": prior.b})


def _extra_conjugate(decision, a, b, spec, confidence):
    if decision == ACCEPT:
        return 0
    if decision == UNDECIDED:
        return conj.extra_clean_units(a, b, spec, confidence)
    return None


def _add_remaining(frame: pd.DataFrame, a_post, b_post, confidence: float) -> list[str]:
    """Fill the remaining-units columns; returns the lots whose count is approximate."""
    approximate: list[str] = []
    size = frame["lot_size"]
    remaining = (size - frame["inspected"]).astype("Int64")
    frame["remaining_units"] = remaining
    med = [None] * len(frame)
    up = [None] * len(frame)
    has = remaining.notna().to_numpy()
    if has.any():
        r = remaining[has].astype("int64").to_numpy()
        res = conj.remaining_defectives(np.asarray(a_post)[has], np.asarray(b_post)[has], r,
                                        confidence)
        for k, i in enumerate(np.flatnonzero(has)):
            med[i], up[i] = int(res["median"][k]), int(res["upper_bound"][k])
            if not res["exact"][k]:
                approximate.append(str(frame["lot"].iloc[i]))
    frame["remaining_defectives_median"] = pd.array(med, dtype="Int64")
    frame["remaining_defectives_upper"] = pd.array(up, dtype="Int64")
    return approximate


def _approximate_note(lots: list[str]) -> list[str]:
    if not lots:
        return []
    shown = ", ".join(lots[:5]) + (f" and {len(lots) - 5} more" if len(lots) > 5 else "")
    return [f"defectives not inspected for lot(s) {shown}: so many units remain that the count "
            "is the continuous limit (remaining units x quantile of the rate), within a few "
            "times the square root of the defectives found of the exact beta-binomial value"]


def _columns(frame: pd.DataFrame) -> list[str]:
    base = ["lot", "part", "supplier", "date", "lot_size", "inspected", "defectives", "row"]
    return base + RESULT_COLUMNS


# --------------------------------------------------------------------------- history

def _part_groups(frame: pd.DataFrame) -> dict[str, np.ndarray]:
    parts = frame["part"].fillna("(no part number)")
    return {str(k): np.flatnonzero((parts == k).to_numpy()) for k in dict.fromkeys(parts)}


def _assess_history(frame, spec, confidence, seed, settings) -> LotAssessment:
    from qualbayes.inference import SamplerSettings  # noqa: PLC0415 - jax path
    from qualbayes.models.lot_history import fit_histories  # noqa: PLC0415

    settings = settings or SamplerSettings(seed=seed)
    results = {c: [None] * len(frame) for c in RESULT_COLUMNS}
    diagnostics, next_lot, draws = {}, {}, {}
    approximate: list[str] = []
    x_all = frame["defectives"].to_numpy(float)
    n_all = frame["inspected"].to_numpy(float)
    tail = (1 - confidence) / 2
    groups = _part_groups(frame)
    fit = fit_histories([(x_all[idx], n_all[idx]) for idx in groups.values()], settings,
                        names=list(groups))
    for j, (part, idx) in enumerate(groups.items()):
        gate = fit.gate.select(part)
        diagnostics[part] = gate.to_dict()
        ok = gate.passed
        mu = fit.draws["mu"][:, :, j].reshape(-1)
        kappa = fit.draws["kappa"][:, :, j].reshape(-1)
        draws[part] = {"mu": fit.draws["mu"][:, :, j], "kappa": fit.draws["kappa"][:, :, j]}
        a0, b0 = mu * kappa, (1 - mu) * kappa
        next_lot[part] = _next_lot_summary(a0, b0, spec, confidence, tail) if ok else {
            "decision": NOT_CONVERGED}
        for i in idx:
            if not ok:
                results["decision"][i] = NOT_CONVERGED
                continue
            alpha, beta = a0 + x_all[i], b0 + (n_all[i] - x_all[i])  # (n - x) first: b0 may be tiny
            prob = mixtures.cdf(spec, alpha, beta)
            d = decide(prob, confidence)
            results["posterior_mean"][i] = mixtures.mean(alpha, beta)
            results["interval_low"][i] = mixtures.ppf(tail, alpha, beta)
            results["interval_high"][i] = mixtures.ppf(1 - tail, alpha, beta)
            results["upper_bound"][i] = mixtures.ppf(confidence, alpha, beta)
            results["prob_within_spec"][i] = prob
            results["decision"][i] = d
            results["extra_clean_units_to_accept"][i] = (
                0 if d == ACCEPT else extra_clean_units_reweighted(alpha, beta, spec, confidence)
                if d == UNDECIDED else None)
            size = frame["lot_size"].iloc[i]
            if not pd.isna(size):
                rem = int(size) - int(n_all[i])
                results["remaining_units"][i] = rem
                med, med_exact = mixtures.betabinom_quantile(0.5, rem, alpha, beta)
                up, up_exact = mixtures.betabinom_quantile(confidence, rem, alpha, beta)
                results["remaining_defectives_median"][i] = med
                results["remaining_defectives_upper"][i] = up
                if not (med_exact and up_exact):
                    approximate.append(str(frame["lot"].iloc[i]))
    for c in RESULT_COLUMNS:
        frame[c] = pd.array(results[c], dtype="Int64") if c in (
            "extra_clean_units_to_accept", "remaining_units", "remaining_defectives_median",
            "remaining_defectives_upper") else pd.Series(results[c], dtype=object)
    for c in ("posterior_mean", "interval_low", "interval_high", "upper_bound",
              "prob_within_spec"):
        frame[c] = pd.to_numeric(frame[c])
    notes = []
    if any(not d["passed"] for d in diagnostics.values()):
        notes.append("the convergence gate failed for at least one part: those lots carry "
                     "'not-converged' and no decision")
    notes += _approximate_note(approximate)
    return LotAssessment(frame[_columns(frame)], spec, confidence,
                         "history: hierarchical beta-binomial over the lots of each part",
                         MODEL_HISTORY, settings.seed, diagnostics, next_lot, notes,
                         draws=draws, sampler=fit.gate.settings)


def _next_lot_summary(a0, b0, spec, confidence, tail) -> dict:
    return {
        "mean": mixtures.mean(a0, b0),
        "interval": [mixtures.ppf(tail, a0, b0), mixtures.ppf(1 - tail, a0, b0)],
        "upper_bound": mixtures.ppf(confidence, a0, b0),
        "prob_within_spec": mixtures.cdf(spec, a0, b0),
    }


def extra_clean_units_reweighted(alpha, beta, spec, confidence, max_units=10**7) -> int | None:
    r"""Extra defect-free units for a lot under the history model.

    m more clean units multiply the posterior of each draw by the ratio of beta-binomial
    marginal likelihoods, :math:`w_d \propto B(\alpha_d, \beta_d + m) / B(\alpha_d, \beta_d)`,
    and move the lot's conditional posterior to Beta(alpha_d, beta_d + m). This reweights the
    existing draws (importance sampling) instead of refitting; when the weights degenerate
    (effective sample size below MIN_WEIGHT_ESS) the count is not given (None).
    """
    from scipy import special  # noqa: PLC0415

    base = special.betaln(alpha, beta)

    def prob(m: int) -> tuple[float, float]:
        logw = special.betaln(alpha, beta + m) - base
        w = np.exp(logw - logw.max())
        ess = w.sum() ** 2 / (w**2).sum()
        return float(np.average(special.betainc(alpha, beta + m, spec), weights=w)), ess

    if prob(0)[0] >= confidence:
        return 0
    hi = 1
    while True:
        p, ess = prob(hi)
        if ess < MIN_WEIGHT_ESS or hi > max_units:
            return None
        if p >= confidence:
            break
        hi *= 2
    lo = hi // 2
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if prob(mid)[0] >= confidence:
            hi = mid
        else:
            lo = mid
    return hi
