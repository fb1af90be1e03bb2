"""The lots question under the history prior: one NUTS fit (every group its own sampler
when there are several), close calls settled by continuing the adapted chains, per-lot
answers from the draws, and the outlier check by exact quadrature."""

from __future__ import annotations

import threading
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pandas as pd

from qualbayes import cross_check
from qualbayes.lot_answers import (
    RESULT_COLUMNS,
    answer_lots,
    group_rows,
    lot_notes,
    next_lot_summary,
    own_data_columns,
)
from qualbayes.lot_decisions import could_settle
from qualbayes.questions import NOT_CONVERGED

#: NUTS target acceptance of the history fit: small histories have a curved tail (large mu
#: with U-shaped lots) where 0.9 and 0.95 gave divergent transitions for some seeds (3 lots:
#: 1 of 5 seeds at 0.95, 4,000 draws) and 0.99 none, at about the same wall time
TARGET_ACCEPT = 0.99

#: from this many parts, a close call continues only the parts that have one (each from its
#: own adapted state), and the parts can then hold different numbers of draws
#: (``LotResult.idata`` raises ``DrawCountError``; ``idata_of(part)`` gives each). Below it,
#: every part continues, so a result of a few parts keeps one rectangular InferenceData at a
#: small cost. With 1,000 parts x 20 lots some lot is close in nearly every round, and
#: continuing every part took about 43 of the command's 71 minutes (docs/speed.md).
ALONE_FROM = 10


def assess_history(frame, spec, confidence, hyper, seed, settings, group_by, decision_basis):
    from qualbayes.inference.run import SamplerSettings  # noqa: PLC0415 - jax path
    from qualbayes.lot_question import MAX_EXTRA_RUNS, MODEL_HISTORY, LotAssessment, _columns  # noqa: PLC0415
    from qualbayes.models.lot_history import fit_histories, more_draws  # noqa: PLC0415
    from qualbayes.models.lot_history_parts import is_part_fit  # noqa: PLC0415

    settings = settings or SamplerSettings(seed=seed, target_accept=TARGET_ACCEPT)
    groups = group_rows(frame, group_by)
    x_all = frame["defectives"].to_numpy(float)
    n_all = frame["inspected"].to_numpy(float)
    data = [(x_all[idx], n_all[idx]) for idx in groups.values()]
    names = list(groups)
    stop = threading.Event()  # set when the fit ends in an error or an interrupt
    with ThreadPoolExecutor(1) as pool:  # what needs no draws, while the sampler runs
        side = pool.submit(_without_draws, data, names, spec, hyper, stop)
        try:
            fit = fit_histories(data, settings, names=names, prior=hyper)
            outliers, quadrature = side.result()
        except BaseException:  # an error or an interrupt, in the fit or while waiting
            stop.set()  # the thread ends at its next group or chunk, not after all of them
            raise
    per_chain = fit.settings.num_samples
    held = {label: (fit, j) for j, label in enumerate(names)}  # the fit of each group's draws
    alone = is_part_fit(fit) and len(names) >= ALONE_FROM
    # each lot's P is final at the first round where it is not too close to call (settled);
    # the g of the draws so far of the lots still close are kept between the rounds (as
    # many as REUSE_VALUES allows: lot_decisions.probabilities)
    settled: dict[str, dict] = {label: {} for label in names}
    reuse: dict[str, dict] = {label: {} for label in names}
    parts = _answer_groups(frame, groups, held, spec, confidence, outliers, full=False,
                           reuse=reuse, settled=settled)
    runs, continued = 0, set()
    cap = fit.draws["mu"].shape[0] * per_chain * (1 + MAX_EXTRA_RUNS)
    while runs < MAX_EXTRA_RUNS:
        # continue while some lot too close to call could still be settled by the cap
        close = [label for label, (ans, ok) in parts.items()
                 if ok and _settleable(ans, x_all[groups[label]], confidence, cap)]
        if not close:
            break
        runs += 1
        changed = _continue(held, close if alone else names, more_draws)
        continued.update(changed)
        parts |= _answer_groups(frame, {label: groups[label] for label in changed}, held, spec,
                                confidence, outliers, full=False, reuse=reuse,
                                settled=settled)
    reuse = settled = None  # the full answers below reuse P itself
    checks = cross_check.lot_groups(held, data, names, spec, hyper, quadrature)
    parts = {k: v if cross_check.agrees(checks[k]) else ({}, False) for k, v in
             _answer_groups(frame, groups, held, spec, confidence, outliers,
                            known=parts).items()}
    out = {c: [None] * len(frame) for c in [*RESULT_COLUMNS, "prob_within_spec_draws",
                                            "_approximate"]}
    out["decision_basis"] = list(frame["decision_basis"])  # kept for lots without a verdict
    diagnostics, next_lot, draws = {}, {}, {}
    for label, idx in groups.items():
        ans, ok = parts[label]
        own, j = held[label]
        diagnostics[label] = cross_check.attach(own.gate.select(label).to_dict(),
                                                checks[label])
        draws[label] = {"mu": own.draws["mu"][:, :, j], "kappa": own.draws["kappa"][:, :, j]}
        if not ok:
            next_lot[label] = {"decision": NOT_CONVERGED}
            for i in idx:
                out["decision"][i] = NOT_CONVERGED
            continue
        mu, kappa = draws[label]["mu"].reshape(-1), draws[label]["kappa"].reshape(-1)
        next_lot[label] = next_lot_summary(mu * kappa, (1 - mu) * kappa, spec, confidence,
                                           own.draws["mu"].shape[0])
        for c, values in ans.items():
            vals = list(values)
            for k, i in enumerate(idx):
                out[c][i] = vals[k]
    frame["group"] = [None] * len(frame)
    for label, idx in groups.items():
        frame.loc[frame.index[idx], "group"] = label
    for c, values in out.items():
        if c in ("extra_clean_units_to_accept", "remaining_units", "remaining_defectives_median",
                 "remaining_defectives_upper", "prob_within_spec_draws"):
            frame[c] = pd.array(values, dtype="Int64")
        elif c in ("decision", "decision_basis", "too_close", "outlier"):
            frame[c] = pd.Series(values, dtype=object).to_numpy()
        else:
            frame[c] = pd.to_numeric(pd.Series(values, dtype=object)).to_numpy()
    own_data_columns(frame, spec, confidence)
    conv = frame["decision"] == NOT_CONVERGED
    frame.loc[conv, ["own_data_prob", "own_data_decision"]] = None
    notes = []
    if any(not d["passed"] for d in diagnostics.values()):
        notes.append("the convergence gate failed for at least one group: those lots carry "
                     "'not-converged' and no decision")
    notes.append(cross_check.summary_line(checks))
    if runs:
        notes.append(_continued_note(runs, per_chain, len(continued), len(names), alone,
                                     MAX_EXTRA_RUNS))
    notes += lot_notes(frame[~conv], conflict=None)
    model = MODEL_HISTORY.format(spread=_spread_words(hyper), groups=", ".join(group_by))
    spread = {"stated_scale": hyper.cv_scale, "words": hyper.describe(),
              "implied_lot_rate": hyper.implied_lot_rate(50_000)}
    return LotAssessment(frame[_columns(frame)], spec, confidence, hyper.describe(), model,
                         settings.seed, diagnostics, next_lot, notes, draws=draws,
                         sampler=_sampler_settings(fit, held, names, len(continued), alone),
                         group_by=tuple(group_by), decision_basis=decision_basis,
                         lot_spread=spread)


def _settleable(ans: dict, x, confidence: float, cap: int) -> bool:
    """Whether some lot of a group's answers is too close to call now and could be settled
    by the draws up to ``cap`` (:func:`qualbayes.lot_decisions.could_settle`)."""
    if not np.any(ans.get("too_close", [])):
        return False
    return bool(could_settle(ans["prob_within_spec"], ans["prob_within_spec_mcse"], x,
                             confidence, np.asarray(ans["prob_within_spec_draws"], float),
                             cap).any())


def _spread_words(hyper) -> str:
    if hyper.cv_scale is None:
        return "phi = 1/sqrt(kappa+1) ~ Uniform(1e-4, 1) (earlier prior)"
    return (f"tau = 1/sqrt(kappa min(mu, 1-mu)) (about the lot-to-lot CV) ~ "
            f"HalfNormal({hyper.cv_scale:g}), kappa <= 1e8")


def _without_draws(data, names, spec, hyper, stop=None) -> tuple[dict, list] | None:
    """The parts of the answer that do not depend on the draws, by quadrature: each lot's
    leave-one-out predictive p-value within its group (label -> array, in the group's lot
    order) and the quadrature side of every group's cross-check
    (:func:`qualbayes.cross_check.lot_quadrature`). Run on a thread of its own while the
    sampler runs (numpy and scipy release the interpreter lock in their array loops, and
    XLA while it compiles and samples); it reads only its arguments (numpy arrays, no
    shared frame), so the numbers are those of a call after the fit. ``stop`` (an Event):
    once set, the work ends at the next group (or chunk of groups) and gives None, so an
    interrupted or failed fit does not wait for it."""
    from qualbayes.models import lot_history_grid as grid  # noqa: PLC0415

    outliers = {}
    for label, (x, n) in zip(names, data, strict=True):
        if stop is not None and stop.is_set():
            return None
        xs, ns, pv = grid.loo_pvalues(x, n, prior=hyper)
        lookup = {(a, b): v for a, b, v in zip(xs, ns, pv, strict=True)}
        outliers[label] = np.array([lookup[(a, b)] for a, b in zip(x, n, strict=True)])
    quadrature = cross_check.lot_quadrature(data, spec, hyper, stop=stop)
    return None if quadrature is None else (outliers, quadrature)


def _answer_groups(frame, groups, held, spec, confidence, outliers, full=True,
                   known=None, reuse=None, settled=None) -> dict:
    """label -> (answers of the group's lots, converged) for every group of ``groups``;
    ``held[label]``: the fit holding the group's latest draws and the group's part in it;
    ``known``: the same call's ``full=False`` answers from the same draws (P is not summed
    again); ``reuse``: label -> the dict that keeps the group's g between close-call rounds
    (:func:`qualbayes.lot_decisions.probabilities`); ``settled``: label -> the dict that
    keeps the P of the group's lots already settled (:func:`qualbayes.lot_answers.
    settled_probabilities`)."""
    from qualbayes.models.lot_history_grid import OUTLIER_LEVEL  # noqa: PLC0415

    out = {}
    for label, idx in groups.items():
        fit, j = held[label]
        if not fit.gate.select(label).passed:
            out[label] = ({}, False)
            continue
        mu = fit.draws["mu"][:, :, j].reshape(-1)
        kappa = fit.draws["kappa"][:, :, j].reshape(-1)
        ans = answer_lots(frame.iloc[idx], mu * kappa, (1 - mu) * kappa, fit.draws["mu"].shape[0],
                          spec, confidence, full,
                          known=None if known is None else known[label][0], workers=None,
                          reuse=None if reuse is None else reuse[label],
                          settled=None if settled is None else settled[label])
        ans["outlier_p"] = outliers[label]
        ans["outlier"] = list(outliers[label] < OUTLIER_LEVEL)
        out[label] = (ans, True)
    return out


def _continue(held: dict, labels: list[str], more_draws) -> list[str]:
    """Continue the chains of the groups ``labels`` (``held`` updated in place); returns the
    labels whose draws changed. Parts sampled as their own problems continue each from its
    own adapted state (``more_draws(fit, parts=...)``: the Fit returned holds only them); a
    joint fit is continued whole, so every group it holds changes."""
    from qualbayes.models.lot_history_parts import is_part_fit  # noqa: PLC0415

    by_fit: dict[int, list[str]] = {}
    for label in labels:
        by_fit.setdefault(id(held[label][0]), []).append(label)
    changed = []
    for mine in by_fit.values():
        fit = held[mine[0]][0]
        if is_part_fit(fit):
            new = more_draws(fit, parts=[held[label][1] for label in mine])
            held.update({label: (new, k) for k, label in enumerate(mine)})
            changed += mine
        else:
            new = more_draws(fit)
            every = [label for label, (f, _) in held.items() if f is fit]
            held.update({label: (new, held[label][1]) for label in every})
            changed += every
    return changed


def _sampler_settings(fit, held: dict, names: list[str], continued: int, alone: bool) -> dict:
    """The record's sampler settings: those of the fit holding every group's latest draws
    (with ``continued_draws_per_chain`` after close calls); when parts were continued alone,
    the first fit's (``fit``) with how many parts were continued (each group's own count is
    in its diagnostics)."""
    if not alone:
        return held[names[0]][0].gate.settings
    return dict(fit.gate.settings) | ({"parts_continued": continued} if continued else {})


def _continued_note(runs: int, per_chain: int, continued: int, parts: int, alone: bool,
                    cap: int) -> str:
    """The note on the close-call rounds: how many rounds, and which chains continued."""
    settled = ("each lot's P is summed over the first draws of every chain up to the round "
               "where it was no longer too close to call, or over all of them (its draws: "
               "'P draws' in the workbook)")
    if not alone:
        return (f"close calls: the adapted chains were continued {runs} time(s) by "
                f"{per_chain:,} draws per chain, without a new warmup (cap {cap}), to settle "
                f"P within its Monte Carlo error; the gate uses all the draws, and {settled}")
    return (f"close calls: the adapted chains of the parts with a close call ({continued:,} "
            f"of {parts:,} parts) were continued, in up to {runs} round(s) of {per_chain:,} "
            f"draws per chain, without a new warmup (cap {cap}), to settle P within its Monte "
            "Carlo error; each part's gate uses all its draws, the other parts keep their "
            f"first draws, and {settled}")
