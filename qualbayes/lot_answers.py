"""Per-lot answers from prior draws, once per distinct (x, n, N) and broadcast back.

``a0``, ``b0`` are the draws of the lot-rate prior Beta(a0, b0): one value for a conjugate
prior, the posterior draws of (mu kappa, (1 - mu) kappa) for the history prior. A lot's
conditional posterior is Beta(a0 + x, b0 + n - x) per draw; its summaries are the mixture
over draws (Rao-Blackwellised). Pure numbers: no wording beyond the notes.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from qualbayes.lot_decisions import (
    LOT,
    PROCESS,
    TOO_CLOSE,
    decide,
    extra_clean_units,
    probabilities,
)
from qualbayes.lot_draw_sums import lot_sums
from qualbayes.models import mixtures
from qualbayes.questions import ACCEPT, REJECT, UNDECIDED
from qualbayes.threads import ordered_map

RESULT_COLUMNS = [
    "posterior_mean", "interval_low", "interval_high", "upper_bound", "prob_within_spec",
    "prob_within_spec_mcse", "decision_basis", "decision", "too_close",
    "extra_clean_units_to_accept", "remaining_units", "remaining_defectives_median",
    "remaining_defectives_upper", "outlier", "outlier_p", "own_data_prob",
    "own_data_decision",
]
#: bounds, means, defectives not inspected and clean-unit counts are computed from at most
#: this many draws, evenly thinned (P and its MCSE, which decide, use every draw)
SUMMARY_DRAWS = 1000
_INT_COLUMNS = ("extra_clean_units_to_accept", "remaining_units",
                "remaining_defectives_median", "remaining_defectives_upper")


def group_rows(frame: pd.DataFrame, group_by: tuple[str, ...]) -> dict[str, np.ndarray]:
    """Group label -> row positions. One column: its value ('(no part)' when empty);
    several: 'column=value' joined with ' / '."""
    parts = [frame[c].astype(object).where(frame[c].notna(), f"(no {c})").astype(str)
             for c in group_by]
    if len(group_by) == 1:
        labels = parts[0].to_numpy()
    else:
        labels = parts[0].radd(f"{group_by[0]}=")
        for c, col in zip(group_by[1:], parts[1:], strict=True):
            labels = labels + f" / {c}=" + col
        labels = labels.to_numpy()
    uniq, first, inverse = np.unique(labels.astype(str), return_index=True,
                                     return_inverse=True)
    order = np.argsort(first)  # groups in order of first appearance
    return {str(uniq[g]): np.flatnonzero(inverse == g) for g in order}


def _combos(frame: pd.DataFrame) -> tuple[list[tuple], np.ndarray]:
    """Distinct (x, n, remaining or None, lot size or None, basis) and each lot's index."""
    x = frame["defectives"].to_numpy(float)
    n = frame["inspected"].to_numpy(float)
    size = frame["lot_size"]
    basis = frame["decision_basis"].to_numpy()
    keys = [(xi, ni, None if pd.isna(si) else int(si), b)
            for xi, ni, si, b in zip(x, n, size, basis, strict=True)]
    uniq = list(dict.fromkeys(keys))
    where = {k: j for j, k in enumerate(uniq)}
    combos = [(k[0], k[1], None if k[2] is None else k[2] - int(k[1]), k[2], k[3]) for k in uniq]
    return combos, np.array([where[k] for k in keys], dtype=int)


def answer_lots(frame: pd.DataFrame, a0, b0, chains: int, spec: float,
                confidence: float, full: bool = True,
                known: dict | None = None, workers: int | None = 1,
                reuse: dict | None = None, settled: dict | None = None) -> dict[str, object]:
    """Every result column for the lots of ``frame`` (one group), as arrays; ``full=False``
    only P, its MCSE and the decision (enough to see whether more draws are needed).
    ``known``: the ``full=False`` answers of the same lots from the same draws, reused
    instead of summing P over every draw again. The full answers of each distinct (x, n)
    can run on ``workers`` threads (None: the CPUs this process may use; numpy and scipy
    release the interpreter lock in their array loops); the numbers do not depend on it.
    The default is 1; the history path passes None: on the 2-core test machine the full
    answers of 1,000 lots (1,000 distinct lot sizes) took 1.6-2.3 s on two threads against
    2.0-3.1 s on one (docs/speed.md). P's beta-binomial sums use the same threads, a block
    of lots each. ``reuse``: a dict the caller keeps between the calls
    on one group's continued chains (:func:`qualbayes.lot_decisions.probabilities`).

    ``settled`` (a dict the caller keeps between the calls on one group's continued chains,
    :func:`settled_probabilities`): each lot's P is final at the first call where it is not
    too close to call, and is then taken from there; only the lots still too close are
    summed again over all the draws. The answers then carry ``prob_within_spec_draws``, the
    number of draws (all chains) each P was summed over: the first ``draws / chains`` of
    every chain."""
    combos, index = _combos(frame)
    k = len(combos)
    cols: dict[str, list] = {c: [None] * k for c in RESULT_COLUMNS}
    used: list[int | None] = [None] * k  # the draws each P was summed over
    approx: list[bool] = [False] * k
    if known is not None:
        first = np.unique(index, return_index=True)[1]  # one lot of each combination
        for c in ("prob_within_spec", "prob_within_spec_mcse", "decision", "too_close"):
            cols[c] = list(np.asarray(known[c], dtype=object)[first])
        approx = [bool(v) for v in np.asarray(known["_approximate"])[first]]
        if "prob_within_spec_draws" in known:
            used = list(np.asarray(known["prob_within_spec_draws"], dtype=object)[first])
    for basis in (LOT, PROCESS):
        sel = [j for j, c in enumerate(combos) if c[4] == basis]
        if not sel or known is not None:
            continue
        sub = [(combos[j][0], combos[j][1], combos[j][2], combos[j][3]) for j in sel]
        x_sel = np.array([combos[j][0] for j in sel])
        prob, err, exact, drawn = settled_probabilities(
            a0, b0, chains, sub, x_sel, spec, basis, confidence,
            None if reuse is None else reuse.setdefault(basis, {}),
            None if settled is None else settled.setdefault(basis, {}), workers=workers)
        dec, close = decide(prob, err, x_sel, confidence)
        for i, j in enumerate(sel):
            cols["prob_within_spec"][j] = float(prob[i])
            cols["prob_within_spec_mcse"][j] = float(err[i])
            cols["decision"][j] = dec[i]
            cols["too_close"][j] = bool(close[i])
            used[j] = int(drawn[i])
            approx[j] = approx[j] or not exact[i]
    if full and np.size(a0) > SUMMARY_DRAWS:
        keep = np.linspace(0, np.size(a0) - 1, SUMMARY_DRAWS).round().astype(int)
        a0, b0 = np.asarray(a0)[keep], np.asarray(b0)[keep]
    for j, c in enumerate(combos):
        cols["decision_basis"][j] = c[4]
    if full:
        by_rate: dict[tuple, list[int]] = {}  # (x, n) -> its combinations (any lot size)
        for j, c in enumerate(combos):
            by_rate.setdefault((c[0], c[1]), []).append(j)

        def work(key: tuple) -> dict[int, dict]:
            return _rate_answers(key, by_rate[key], combos, cols["decision"],
                                 cols["too_close"], a0, b0, spec, confidence)

        keys = list(by_rate)
        for done in ordered_map(work, keys, workers):
            for j, values in done.items():
                approximate = values.pop("_approximate")
                approx[j] = approx[j] or approximate
                for c, v in values.items():
                    cols[c][j] = v
    out: dict[str, object] = {}
    for c, values in cols.items():
        if c in ("outlier", "outlier_p", "own_data_prob", "own_data_decision"):
            continue
        arr = np.asarray(values, dtype=object)[index]
        if c in _INT_COLUMNS:
            out[c] = pd.array(list(arr), dtype="Int64")
        elif c in ("decision", "decision_basis", "too_close"):
            out[c] = list(arr)
        else:
            out[c] = pd.to_numeric(pd.Series(list(arr), dtype=object)).to_numpy()
    out["_approximate"] = np.asarray(approx)[index]
    if settled is not None or (known is not None and "prob_within_spec_draws" in known):
        out["prob_within_spec_draws"] = pd.array(list(np.asarray(used, dtype=object)[index]),
                                                 dtype="Int64")
    return out


def settled_probabilities(a0, b0, chains: int, combos: list[tuple], x, spec: float,
                          basis: str, confidence: float, reuse: dict | None,
                          settled: dict | None, workers: int | None = None):
    """(P, MCSE, exact, draws summed over) of every combination (x, n, remaining, lot size)
    of one basis. ``settled`` (kept by the caller between the calls on one group's continued
    chains): combination -> its (P, MCSE, exact, draws) from the first call where it was
    not too close to call (:func:`qualbayes.lot_decisions.decide`); those are returned as
    they are, and the others are summed over all of the present draws
    (:func:`qualbayes.lot_decisions.probabilities`, with ``reuse``) and added to it when
    they are no longer too close. The g values kept for a settled combination are let go.
    Without ``settled`` every combination is summed over every draw."""
    k, drawn = len(combos), np.size(a0)
    prob, err = np.empty(k), np.empty(k)
    exact, used = np.ones(k, bool), np.full(k, drawn, dtype=np.int64)
    old = {} if settled is None else settled
    todo = [i for i, c in enumerate(combos) if c not in old]
    if todo:
        p, e, ok = probabilities(a0, b0, chains, [combos[i] for i in todo], spec, basis,
                                 reuse, workers=workers)
        prob[todo], err[todo], exact[todo] = p, e, ok
    for i, c in enumerate(combos):
        if c in old:
            prob[i], err[i], exact[i], used[i] = old[c]
    if settled is not None:
        _, close = decide(prob[todo], err[todo], np.asarray(x, float)[todo], confidence)
        kept = (reuse or {}).get("g", {})
        for i, near in zip(todo, close, strict=True):
            if not near:
                settled[combos[i]] = (float(prob[i]), float(err[i]), bool(exact[i]), drawn)
                kept.pop(combos[i], None)
    return prob, err, exact, used


def _rate_answers(key: tuple, members: list[int], combos: list[tuple], decisions: list,
                  too_close: list, a0, b0, spec: float, confidence: float) -> dict[int, dict]:
    """The full answers of the combinations ``members`` sharing (x, n) = ``key``: the
    rate's mean and bounds (equal for any lot size), clean units to accept, defectives not
    inspected; combination index -> column -> value (and ``_approximate``)."""
    x, n = key
    tail = (1.0 - confidence) / 2.0
    alpha, beta = a0 + x, b0 + (n - x)
    rate = (mixtures.mean(alpha, beta), mixtures.ppf(tail, alpha, beta),
            mixtures.ppf(1.0 - tail, alpha, beta), mixtures.ppf(confidence, alpha, beta))
    ess: dict[int, float] = {}  # the clean-unit weights' ESS by count (any lot size)
    out: dict[int, dict] = {}
    for j in members:
        _, _, rem, size, basis = combos[j]
        v: dict = dict(zip(("posterior_mean", "interval_low", "interval_high", "upper_bound"),
                           rate, strict=True))
        v["_approximate"] = False
        d = decisions[j]
        search = d in (UNDECIDED, REJECT) and not too_close[j]
        row, quantiles = None, None
        if rem is not None and rem > 0 and np.size(a0) > 1:  # one sum for both answers
            need = int(np.floor(spec * size - x + 1e-9)) if search and basis == LOT else 0
            row, quantiles = lot_sums(a0, b0, x, n, size, need=need, qs=(0.5, confidence),
                                      rate_high=rate[2])
        if d == ACCEPT:
            v["extra_clean_units_to_accept"] = 0
        elif search:
            v["extra_clean_units_to_accept"] = extra_clean_units(
                a0, b0, x, n, rem, size, spec, confidence, basis, ess_cache=ess,
                lot_sums=row)
        if rem is not None:
            v["remaining_units"] = rem
            (med, med_exact), (up, up_exact) = quantiles or mixtures.betabinom_quantiles(
                (0.5, confidence), rem, alpha, beta)
            v["remaining_defectives_median"] = med
            v["remaining_defectives_upper"] = up
            v["_approximate"] = not (med_exact and up_exact)
        out[j] = v
    return out


def beta_answers(frame: pd.DataFrame, a: float, b: float, spec: float,
                 confidence: float) -> tuple[list, list]:
    """(P, decision) of every lot under the prior Beta(a, b), on each lot's own basis (the
    rows of a prior-sensitivity table)."""
    sub = frame[["defectives", "inspected", "lot_size", "decision_basis"]].copy()
    sub["decision_basis"] = sub["decision_basis"].fillna(PROCESS)
    ans = answer_lots(sub, np.array([a]), np.array([b]), 1, spec, confidence, full=False)
    return list(ans["prob_within_spec"]), list(ans["decision"])


def own_data_columns(frame: pd.DataFrame, spec: float, confidence: float,
                     same: bool = False) -> None:
    """Each lot's own-data decision (uniform prior, same basis) beside the one given."""
    if same:
        frame["own_data_prob"] = frame["prob_within_spec"]
        frame["own_data_decision"] = frame["decision"]
        return
    frame["own_data_prob"], frame["own_data_decision"] = own_data(frame, spec, confidence)


def own_data(frame: pd.DataFrame, spec: float, confidence: float) -> tuple:
    """(P, decision) of every lot from its own data alone (uniform prior, its own basis)."""
    sub = frame[["defectives", "inspected", "lot_size", "decision_basis"]].copy()
    ans = answer_lots(sub, np.ones(1), np.ones(1), 1, spec, confidence, full=False)
    return ans["prob_within_spec"], ans["decision"]


def _names(lots: list[str]) -> str:
    return ", ".join(lots[:8]) + (f" and {len(lots) - 8} more" if len(lots) > 8 else "")


def lot_notes(frame: pd.DataFrame, conflict: str | None) -> list[str]:
    """Plain-words notes: close calls, approximations, outliers and prior conflicts."""
    notes = []
    lots = frame["lot"].astype(str)
    if "_approximate" in frame and frame["_approximate"].any():
        notes.append(f"lot(s) {_names(list(lots[frame['_approximate'].astype(bool)]))}: so "
                     "many units are not inspected that the count of their defectives is the "
                     "continuous limit (units x quantile of the rate), within a few times the "
                     "square root of the defectives found of the exact beta-binomial value")
    close = frame["too_close"].fillna(False).astype(bool) if "too_close" in frame else None
    if close is not None and close.any():
        notes.append(f"lot(s) {_names(list(lots[close]))}: {TOO_CLOSE} (P is within 3 Monte "
                     "Carlo standard errors of the confidence level, or within its stated "
                     "quadrature error); they are undecided")
    flagged = frame["outlier"].fillna(False).astype(bool) if "outlier" in frame else None
    if flagged is not None and flagged.any():
        names = _names(list(lots[flagged]))
        if conflict == "prior":
            notes.append(f"lot(s) {names}: the data conflict with the stated prior (more "
                         "defectives than it makes plausible: prior predictive p-value below "
                         "5%); the prior may be wrong for this lot: see its own-data decision")
        else:
            notes.append(f"lot(s) {names}: this lot does not look like the others of its "
                         "group (more defectives than the other lots make plausible: "
                         "leave-one-out predictive p-value below 5%); pooling may make the "
                         "others' decisions optimistic: see their own-data decisions")
    if "own_data_decision" in frame:
        differ = (frame["own_data_decision"] != frame["decision"]).to_numpy()
        if differ.any():
            notes.append(f"lot(s) {_names(list(lots[differ]))}: the decision differs from "
                         "the one the lot's own data give under the uniform prior (shown "
                         "beside it)")
    return notes


def next_lot_summary(a0, b0, spec: float, confidence: float, chains: int) -> dict:
    """The next lot's rate, Beta(a0, b0) mixed over the draws: median, one-sided bound, P
    with its MCSE, and the mean (which a heavy upper tail can put above the bound)."""
    from scipy import special  # noqa: PLC0415

    from qualbayes.inference.mcse import mcse_mean  # noqa: PLC0415

    g = special.betainc(a0, b0, spec)
    return {
        "median": mixtures.ppf(0.5, a0, b0),
        "upper_bound": mixtures.ppf(confidence, a0, b0),
        "mean": mixtures.mean(a0, b0),
        "prob_within_spec": float(g.mean()),
        "prob_within_spec_mcse": float(mcse_mean(g.reshape(chains, -1))),
        "mean_note": "the mean can exceed the one-sided bound: a few draws allow very bad "
                     "lots, and the mean weighs them by their size, not their probability",
    }
