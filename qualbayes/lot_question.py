"""Lot acceptance: from validated lots to a decision per lot (the API behind ``lots``).

Every lot is answered through its distinct combination (defectives, inspected, units not
inspected): equal lots of a group have equal answers, so the work is done once per
combination and broadcast back (:mod:`qualbayes.lot_answers`).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from qualbayes.data.lot_table import LotTable
from qualbayes.lot_answers import RESULT_COLUMNS, answer_lots, lot_notes, own_data_columns
from qualbayes.lot_decisions import LOT, PROCESS
from qualbayes.lot_decisions import extra_clean_units as _extra
from qualbayes.models.lot_prior import HISTORY, HISTORY_PHI_UNIFORM, BetaPrior
from qualbayes.models.lot_spread import HistoryPrior, PhiUniformPrior

GROUP_COLUMNS = ("part", "supplier")
#: Close calls draw more: up to this many further rounds, each continuing the adapted chains
#: by as many draws again (so at most 4 chains x 4,000 = 16,000 draws with the defaults).
MAX_EXTRA_RUNS = 3


@dataclass
class LotAssessment:
    """Everything the lots question produced; ``lots`` has one row per lot."""

    lots: pd.DataFrame
    spec: float
    confidence: float
    prior: str
    model: str
    seed: int | None
    diagnostics: dict[str, dict] = field(default_factory=dict)  # group -> gate dict
    next_lot: dict[str, dict] = field(default_factory=dict)  # group -> predictive summary
    notes: list[str] = field(default_factory=list)
    prior_params: dict | None = None  # {"a": ..., "b": ...} for the conjugate priors
    draws: dict[str, dict] = field(default_factory=dict)  # group -> {"mu", "kappa"} (chain, draw)
    sampler: dict = field(default_factory=dict)
    group_by: tuple[str, ...] = ("part",)
    decision_basis: str = LOT  # asked for; each lot's own basis is in lots["decision_basis"]
    lot_spread: dict | None = None  # the history hyperprior as stated, and what it implies
    engine: dict | None = None  # which engine answered and its accuracy (record key "engine")

    @property
    def converged(self) -> bool:
        return all(d["passed"] for d in self.diagnostics.values())


MODEL_CONJUGATE = ("x ~ Binomial(n, p); p ~ Beta(a, b); posterior p | x ~ Beta(a + x, b + n - x) "
                   "(closed form)")
MODEL_HISTORY = ("x_i ~ Binomial(n_i, p_i); p_i ~ Beta(mu*kappa, (1-mu)*kappa); mu ~ Beta(1,1); "
                 "{spread}; p_i marginalised, NUTS on (logit mu, log(tau - tau_lo)), "
                 "p_i | mu, kappa, x_i ~ Beta(mu*kappa + x_i, (1-mu)*kappa + n_i - x_i); "
                 "one model per group of lots ({groups})")


def assess_lots(table: LotTable, spec: float, confidence: float = 0.95,
                prior: BetaPrior | str | HistoryPrior = "uniform", seed: int = 20261202,
                settings=None, *, group_by: tuple[str, ...] = ("part",),
                decision_basis: str = LOT, lot_spread: float | None = None,
                check_prior_conflict: bool = False, engine: str = "nuts",
                processes: int | None = None, scheduler: str | None = None,
                local_pool: bool = False) -> LotAssessment:
    """Answer "is the lot within spec at confidence C?" for every lot.

    ``decision_basis``: ``lot`` (default) decides about the lot's own fraction defective
    when its lot size is given (and about the process rate otherwise), ``process`` always
    about the rate p. ``group_by``: the columns whose values define the lots that share a
    history (``history`` prior). ``lot_spread``: the stated scale S of the lot-to-lot
    coefficient of variation (history prior; default in qualbayes.models.lot_spread).
    ``check_prior_conflict``: check each lot's data against a stated Beta prior.
    ``engine`` (history prior): ``nuts`` (default, sampled and gated) or ``quadrature`` (the
    exact grid posterior of each group, deterministic; :mod:`qualbayes.lot_batch`), whose
    groups run in ``processes`` local processes or on the Dask ``scheduler`` when given.
    ``local_pool``: without either, a large batch may run on a pool of new local processes
    (:func:`qualbayes.lot_batch.local_processes`): only for a caller that owns the process
    and guards its main module, as the command line does (a started process imports the
    main module again).
    """
    if decision_basis not in (LOT, PROCESS):
        from qualbayes.errors import ParameterError  # noqa: PLC0415

        raise ParameterError(f"decision_basis {decision_basis!r}: choose 'lot' or 'process'")
    group_by = _check_group_by(group_by)
    hyper = _history_prior(prior, lot_spread)
    _check_engine(engine, hyper, processes, scheduler)
    if hyper is None and isinstance(prior, str):
        from qualbayes.models.lot_prior import parse_lot_prior  # noqa: PLC0415

        prior = parse_lot_prior(prior)
    frame = table.frame.copy()
    frame["decision_basis"] = np.where(frame["lot_size"].notna() & (decision_basis == LOT),
                                       LOT, PROCESS)
    if hyper is not None and engine == "quadrature":
        from qualbayes.lot_batch import assess_quadrature  # noqa: PLC0415

        return assess_quadrature(frame, spec, confidence, hyper, group_by, decision_basis,
                                 processes=processes, scheduler=scheduler,
                                 local_pool=local_pool)
    if hyper is not None:
        from qualbayes.lot_history_answers import assess_history  # noqa: PLC0415

        result = assess_history(frame, spec, confidence, hyper, seed, settings, group_by,
                                decision_basis)
        result.engine = {"name": "nuts", "accuracy": "each P carries its Monte Carlo "
                         "standard error (prob_within_spec_mcse); the convergence gate and "
                         "the quadrature cross-check per group are in diagnostics"}
        return result
    assert isinstance(prior, BetaPrior)
    answers = answer_lots(frame, np.array([prior.a]), np.array([prior.b]), 1, spec,
                          confidence)
    for key, values in answers.items():
        frame[key] = values
    frame["group"] = None
    frame["outlier"] = None
    frame["outlier_p"] = np.nan
    if check_prior_conflict:
        from qualbayes.lot_decisions import tail_pvalue  # noqa: PLC0415
        from qualbayes.models.lot_history_grid import OUTLIER_LEVEL  # noqa: PLC0415

        pv = tail_pvalue(frame["defectives"], frame["inspected"], prior.a, prior.b) if len(
            frame) else np.array([])
        frame["outlier_p"] = pv
        frame["outlier"] = pv < OUTLIER_LEVEL
    own_data_columns(frame, spec, confidence, same=prior.a == 1.0 and prior.b == 1.0)
    notes = lot_notes(frame, conflict="prior" if check_prior_conflict else None)
    return LotAssessment(frame[_columns(frame)], spec, confidence, prior.describe(),
                         MODEL_CONJUGATE, None, notes=notes,
                         prior_params={"a": prior.a, "b": prior.b}, group_by=group_by,
                         decision_basis=decision_basis,
                         engine={"name": "closed form", "accuracy": "exact (conjugate Beta)"})


def _check_engine(engine, hyper, processes, scheduler) -> None:
    from qualbayes.errors import ParameterError  # noqa: PLC0415

    if engine not in ("nuts", "quadrature"):
        raise ParameterError("engine", engine, "choose 'nuts' or 'quadrature'")
    if engine == "quadrature" and hyper is None:
        raise ParameterError("engine", engine, "quadrature answers the history prior: a Beta "
                             "prior has a closed form and needs no engine")
    if (processes is not None or scheduler is not None) and engine != "quadrature":
        raise ParameterError("processes" if processes is not None else "scheduler",
                             processes if processes is not None else scheduler,
                             "processes and scheduler split the quadrature batch: give them "
                             "with engine='quadrature'")
    if processes is not None and (isinstance(processes, bool) or not isinstance(processes, int)
                                  or not 1 <= processes <= 1024):
        raise ParameterError("processes", processes, "a whole number of processes, 1 to 1024")
    if scheduler is not None and (not isinstance(scheduler, str) or not scheduler.strip()):
        raise ParameterError("scheduler", scheduler, "a Dask scheduler address such as "
                             "'tcp://10.0.0.5:8786'")


def _check_group_by(group_by) -> tuple[str, ...]:
    cols = tuple(group_by) if not isinstance(group_by, str) else (group_by,)
    if not cols or any(c not in GROUP_COLUMNS for c in cols) or len(set(cols)) != len(cols):
        from qualbayes.errors import ParameterError  # noqa: PLC0415

        raise ParameterError(f"group_by {group_by!r}: one or more of {', '.join(GROUP_COLUMNS)}"
                             ", each once")
    return cols


def _history_prior(prior, lot_spread):
    if isinstance(prior, (HistoryPrior, PhiUniformPrior)):
        return prior
    if prior == HISTORY:
        return HistoryPrior() if lot_spread is None else HistoryPrior(float(lot_spread))
    if prior == HISTORY_PHI_UNIFORM:
        return PhiUniformPrior()
    if lot_spread is not None:
        from qualbayes.errors import ParameterError  # noqa: PLC0415

        raise ParameterError("lot_spread is the spread of the history prior: give it only "
                             "with prior='history'")
    return None


def _columns(frame: pd.DataFrame) -> list[str]:
    base = ["lot", "part", "supplier", "date", "lot_size", "inspected", "defectives", "row",
            "group"]
    return base + RESULT_COLUMNS + [c for c in EXTRA_COLUMNS if c in frame]


#: columns one engine adds: the quadrature error of P (in place of its MCSE); the draws
#: (all chains) each P was summed over (NUTS: a lot settled before the last close-call
#: round keeps the P of that round)
EXTRA_COLUMNS = ("prob_within_spec_error", "prob_within_spec_draws")


def lot_columns(frame: pd.DataFrame) -> list[str]:
    """The columns of ``LotAssessment.lots`` present in ``frame``, in order."""
    return _columns(frame)


def extra_clean_units_reweighted(alpha, beta, spec, confidence, max_units=10**7) -> int | None:
    """Extra defect-free units for a lot under the history model, process basis (the rate
    p): see :func:`qualbayes.lot_decisions.extra_clean_units`. ``alpha``, ``beta`` are the
    lot's conditional Beta parameters per draw."""
    del max_units
    alpha = np.asarray(alpha, float)
    return _extra(alpha, np.asarray(beta, float), 0.0, 0.0, None, None, spec, confidence,
                  PROCESS)
