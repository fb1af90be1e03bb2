"""Result objects of the questions: frozen, with a tidy frame, the terminal text, an HTML
view for notebooks, the run record and, where NUTS ran, an ``arviz.InferenceData``.

* ``to_frame()``: one row per lot / group / plan, named columns (never read by position).
* ``summary()``: the text the command line prints (built by :mod:`qualbayes.evidence`).
* ``_repr_html_()``: the frame as an HTML table with the safety caution, for notebooks.
* ``to_record()``: the run record the command line writes (a JSON-ready dict).
* ``idata``: the posterior of every MCMC fit with named dimensions (``part`` for lot
  histories, ``group`` for life) and their coordinates, the sample stats (``diverging``)
  and the observed data; ``None`` when the answer is a closed form. Built on first use
  (ArviZ is imported then, not before).
"""

from __future__ import annotations

import html
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import pandas as pd

from qualbayes.caution import CAUTION


def html_view(frame: pd.DataFrame, title: str) -> str:
    body = frame.to_html(index=False, escape=True, na_rep="", float_format=lambda v: f"{v:.6g}")
    return (f"<div><p><b>{html.escape(title)}</b></p>{body}"
            f"<p><small>{html.escape(CAUTION)}</small></p></div>")


def python_command(name: str, options: dict) -> str:
    shown = ", ".join(f"{k}={v!r}" for k, v in options.items() if v is not None)
    return f"python: qualbayes.{name}(data, {shown})"


def _matching_diverging(fits: tuple, shape: tuple):
    """The divergence flags (chain, draw) of the fits behind the draws: one fit's own, or the
    fits' flags stacked along the chain axis when extra runs were added as chains (a close
    call); None when no arrangement matches the draws."""
    flags = [np.asarray(f.diverging) for f in fits if getattr(f, "diverging", None) is not None]
    for d in reversed(flags):
        if d.shape == shape:
            return d
    for start in range(len(flags)):
        stacked = flags[start:]
        if stacked and all(d.shape[1:] == shape[1:] for d in stacked):
            joined = np.concatenate(stacked, axis=0)
            if joined.shape == shape:
                return joined
    return None


class DrawCountError(ValueError):
    """The groups (or parts) of a result were sampled with different numbers of chains or
    draws (a close call is sampled again with more draws), so their posteriors do not fit
    one rectangular InferenceData; ``result.idata_of(name)`` gives each one's."""


def _shape_text(shape: tuple) -> str:
    return f"{shape[0]} chains x {shape[1]:,} draws" if len(shape) == 2 else str(shape)


def _own_flags(name: str, dim: str, fits: tuple, shape: tuple):
    """The fit that produced ``name``'s draws (the last fit naming it in coordinate ``dim``
    whose divergence flags have the draws' shape) and those flags, or (None, None). A fit
    whose parts were each their own sampler gives that part's own column of
    ``diverging_parts``, not the any-part flags."""
    for f in reversed(fits):
        names = [str(c) for c in (getattr(f, "coords", None) or {}).get(dim, [])]
        if str(name) not in names:
            continue
        per_part = getattr(f, "diverging_parts", None)
        if per_part is not None and np.shape(per_part) == (*shape, len(names)):
            return f, np.asarray(per_part)[..., names.index(str(name))]
        flags = getattr(f, "diverging", None)
        if flags is not None and np.shape(flags) == tuple(shape):
            return f, np.asarray(flags)
    return None, None


def _per_part_flags(dim: str, names: list[str], fits: tuple, shape: tuple):
    """The (chain, draw, part) divergence flags of a fit that sampled every part as its own
    problem (``Fit.diverging_parts``) over exactly ``names``, or None."""
    for f in reversed(fits):
        flags = getattr(f, "diverging_parts", None)
        coords = [str(c) for c in (getattr(f, "coords", None) or {}).get(dim, [])]
        if flags is not None and coords == [str(n) for n in names] \
                and np.shape(flags) == (*shape, len(names)):
            return np.asarray(flags)
    return None


def _posterior_idata(draws: dict, dim: str, names: list[str], fits: tuple, observed: dict,
                     observed_dims: dict, observed_coords: dict):
    """One InferenceData from per-element draws ``{name: {var: (chain, draw)}}``.

    ``sample_stats.diverging`` is (chain, draw) when one fit produced every element's draws,
    and (chain, draw, ``dim``) when elements were fitted separately (each its own fit's
    flags). Raises :class:`DrawCountError` when the elements' draws differ in shape."""
    from qualbayes.inference.run import to_idata  # noqa: PLC0415

    shape_of = {n: np.shape(next(iter(draws[n].values()))) for n in names}
    if len(set(shape_of.values())) != 1:
        listed = "; ".join(f"{n}: {_shape_text(sh)}" for n, sh in shape_of.items())
        raise DrawCountError(
            f"the {dim}s were sampled with different numbers of draws ({listed}; a close "
            f"call is sampled again with more draws), so they do not fit one InferenceData: "
            f"use result.idata_of({names[0]!r}) for one {dim}")
    shape = shape_of[names[0]]
    variables = list(draws[names[0]])
    posterior = {v: np.stack([np.asarray(draws[n][v]) for n in names], axis=-1)
                 for v in variables}
    own = [_own_flags(n, dim, fits, shape) for n in names]
    dims = {v: [dim] for v in variables}
    per_part = _per_part_flags(dim, names, fits, shape)
    if per_part is not None:  # parts sampled as independent problems, each its own flags
        diverging = per_part
        dims["diverging"] = [dim]
    elif all(f is not None for f, _ in own) and (
            len({id(f) for f, _ in own}) > 1
            or getattr(own[0][0], "diverging_parts", None) is not None):
        # elements from several fits, or parts each their own sampler: each its own flags
        diverging = np.stack([flags for _, flags in own], axis=-1)
        dims["diverging"] = [dim]
    elif own and own[0][0] is not None and all(f is own[0][0] for f, _ in own):
        diverging = own[0][1]
    else:
        diverging = _matching_diverging(fits, shape)
    return to_idata(posterior, diverging, dims, {dim: list(names)} | observed_coords,
                    observed, observed_dims)


# --------------------------------------------------------------------------- lots

@dataclass(frozen=True)
class LotResult:
    """Decisions lot by lot: is P(p <= spec | data) >= confidence?"""

    lots: pd.DataFrame
    spec: float
    confidence: float
    prior: str
    model: str
    seed: int | None
    notes: tuple[str, ...]
    diagnostics: dict = field(repr=False)
    next_lot: dict = field(repr=False)
    assessment: object = field(repr=False, compare=False)  # acceptance.LotAssessment
    table: object = field(repr=False, compare=False)  # data.lots.LotTable
    sha256: str | None = field(default=None, repr=False)
    options: dict = field(default_factory=dict, repr=False)
    fits: tuple = field(default=(), repr=False, compare=False)

    @property
    def converged(self) -> bool:
        return all(d["passed"] for d in self.diagnostics.values())

    def to_frame(self) -> pd.DataFrame:
        """One row per lot: the inputs, the posterior summaries and the decision."""
        return self.lots.copy()

    def to_record(self) -> dict:
        from qualbayes.evidence.lot_record import lots_record  # noqa: PLC0415
        from qualbayes.provenance import versions  # noqa: PLC0415

        return lots_record(self.assessment, self.table, self.sha256 or "",
                           python_command("assess_lots", self.options), versions())

    def summary(self) -> str:
        from qualbayes.evidence.lot_record import lots_text  # noqa: PLC0415

        return lots_text(self.to_record())

    def _repr_html_(self) -> str:
        shown = self.lots[["lot", "part", "inspected", "defectives", "posterior_mean",
                           "upper_bound", "prob_within_spec", "decision"]]
        return html_view(shown, f"P(p <= {self.spec:g} | data) >= {self.confidence:g}? "
                            f"prior {self.prior}")

    @cached_property
    def idata(self):
        """Posterior of mu and kappa per part (history prior), or None (closed form)."""
        draws = getattr(self.assessment, "draws", None)
        if not draws:
            return None
        lots = self.lots
        observed = {"defectives": lots["defectives"].to_numpy(int),
                    "inspected": lots["inspected"].to_numpy(int)}
        dims = {"defectives": ["lot"], "inspected": ["lot"]}
        return _posterior_idata(draws, "part", list(draws), self.fits, observed, dims,
                                {"lot": lots["lot"].astype(str).tolist()})

    def idata_of(self, part: str):
        """The InferenceData of one part: its draws as used for its answers (after any
        further draws of a close call), its own divergence flags and its lots' data. Works
        when the parts hold different numbers of draws (where ``idata`` raises
        :class:`DrawCountError`)."""
        draws = getattr(self.assessment, "draws", None)
        if not draws:
            return None
        if part not in draws:
            raise KeyError(f"no part {part!r}; the parts are {list(draws)}")
        lots = self.lots.loc[self.lots["part"].astype(str) == str(part)]
        observed = {"defectives": lots["defectives"].to_numpy(int),
                    "inspected": lots["inspected"].to_numpy(int)}
        dims = {"defectives": ["lot"], "inspected": ["lot"]}
        return _posterior_idata({part: draws[part]}, "part", [part], self.fits, observed,
                                dims, {"lot": lots["lot"].astype(str).tolist()})


# --------------------------------------------------------------------------- life

LIFE_QUANTITIES = ("shape", "scale", "b1", "b10", "mean_life")


@dataclass(frozen=True)
class LifeResult:
    """Reliability at the mission time, group by group: P(R(mission) >= target | data)."""

    groups: tuple[dict, ...] = field(repr=False)
    mission: float
    target: float
    confidence: float
    prior: tuple[str, ...]
    seed: int | None
    notes: tuple[str, ...]
    assessment: object = field(repr=False, compare=False)  # life_analysis.LifeAssessment
    table: object = field(repr=False, compare=False)  # data.life.LifeTable
    sha256: str | None = field(default=None, repr=False)
    options: dict = field(default_factory=dict, repr=False)
    fits: tuple = field(default=(), repr=False, compare=False)

    @property
    def converged(self) -> bool:
        return all(g["diagnostics"]["passed"] for g in self.groups)

    def to_frame(self) -> pd.DataFrame:
        """One row per group: counts, medians and credible intervals of shape, scale, B1,
        B10 and mean life, R(mission) with its lower bound, P(R >= target) with its Monte
        Carlo error, the decision and whether the gate passed."""
        rows = []
        for g in self.groups:
            row = {"group": g["group"], "units": g["units"], "failures": g["failures"],
                   "suspensions": g["suspensions"],
                   "interval_censored": g["interval_censored"],
                   "left_censored": g["left_censored"]}
            for q in LIFE_QUANTITIES:
                s = g[q] or {"median": None, "interval": [None, None]}
                row |= {f"{q}_median": s["median"], f"{q}_low": s["interval"][0],
                        f"{q}_high": s["interval"][1]}
            rel = g["reliability_at_mission"] or {"median": None, "lower_bound": None}
            row |= {"reliability_median": rel["median"],
                    "reliability_lower_bound": rel["lower_bound"],
                    "prob_meets_target": g["prob_meets_target"],
                    "prob_meets_target_mcse": g["prob_meets_target_mc_error"],
                    "decision": g["decision"], "converged": g["diagnostics"]["passed"]}
            rows.append(row)
        frame = pd.DataFrame(rows)
        numeric = [c for c in frame.columns if c.endswith(("_median", "_low", "_high",
                                                           "_bound", "_mcse"))
                   or c == "prob_meets_target"]
        frame[numeric] = frame[numeric].astype(float)
        return frame

    def to_record(self) -> dict:
        from qualbayes.evidence.life_record import life_record  # noqa: PLC0415
        from qualbayes.provenance import versions  # noqa: PLC0415

        return life_record(self.assessment, self.table, self.sha256 or "",
                           python_command("assess_life", self.options), versions())

    def summary(self) -> str:
        from qualbayes.evidence.life_record import life_text  # noqa: PLC0415

        return life_text(self.to_record())

    def _repr_html_(self) -> str:
        shown = self.to_frame()[["group", "units", "failures", "shape_median", "scale_median",
                                 "b10_median", "reliability_median", "reliability_lower_bound",
                                 "prob_meets_target", "decision"]]
        return html_view(shown, f"P(R({self.mission:g}) >= {self.target:g} | data) >= "
                            f"{self.confidence:g}?")

    def _draws(self) -> dict:
        return {g: d["chains"] for g, d in (self.assessment.draws or {}).items()
                if "chains" in d}

    def _observed(self, names: list[str]):
        frame = self.table.frame
        frame = frame[frame["group"].isin(names)]
        observed = {"lower": frame["lower"].to_numpy(float),
                    "upper": frame["upper"].to_numpy(float),
                    "kind": frame["kind"].astype(str).to_numpy(),
                    "unit_group": frame["group"].astype(str).to_numpy()}
        dims = {k: ["unit"] for k in observed}
        return observed, dims, {"unit": frame["unit"].astype(str).tolist()}

    @cached_property
    def idata(self):
        """Posterior of log shape and log scale (chain, draw, group), the divergences and the
        observed times of every group.

        A group whose call was close is sampled again with more draws
        (:mod:`qualbayes.life_precision`); its draws then differ in number from the others'
        and no single InferenceData holds them all: this raises :class:`DrawCountError` (a
        ``ValueError``) naming each group's chains and draws; ``idata_of(group)`` always
        works. Groups refitted one by one with equal draws share one InferenceData whose
        ``diverging`` has a ``group`` dimension (each group's own fit)."""
        draws = self._draws()
        observed, dims, coords = self._observed(list(draws))
        return _posterior_idata(draws, "group", list(draws), self.fits, observed, dims, coords)

    def idata_of(self, group: str):
        """The InferenceData of one group: its draws as used for its answer (after any extra
        draws of a close call), its own fit's divergences and its observed times."""
        every = self._draws()
        if group not in every:
            raise KeyError(f"no group {group!r}; the groups are {list(every)}")
        observed, dims, coords = self._observed([group])
        return _posterior_idata({group: every[group]}, "group", [group], self.fits,
                                observed, dims, coords)


# --------------------------------------------------------------------------- plans

@dataclass(frozen=True)
class PlanResult:
    """A test or sampling plan: its tables by name, its curves and its verdict."""

    kind: str
    question: str
    verdict: str
    record: dict = field(repr=False)
    #: the analysis prior as run (RatePrior, GammaPrior) or None (classical)
    analysis: object = field(default=None, repr=False, compare=False)
    #: (part, Fit) of a prior learned from a lot history
    fits: tuple = field(default=(), repr=False, compare=False)

    @classmethod
    def from_record(cls, record: dict, analysis=None, fits: tuple = ()) -> PlanResult:
        return cls(record["plan"], record["question"], record["verdict"], record, analysis,
                   fits)

    @property
    def table_names(self) -> list[str]:
        return [t["name"] for t in self.record["tables"]]

    def table(self, name: str = "Plans") -> pd.DataFrame:
        """One table of the plan by name (e.g. "Plans", "Trade-off", "OC points")."""
        for t in self.record["tables"]:
            if t["name"] == name:
                return pd.DataFrame(t["rows"], columns=t["columns"])
        raise KeyError(f"no table {name!r}; the tables are {self.table_names}")

    def to_frame(self) -> pd.DataFrame:
        """The main table: the plans (or, for sampling, the plan found)."""
        return self.table(self.table_names[0]) if self.table_names else pd.DataFrame()

    def curve(self, name: str = "oc") -> pd.DataFrame:
        """A curve as a tidy frame: x, series label, y."""
        for c in self.record["curves"]:
            if c["name"] == name:
                return pd.DataFrame([{"x": x, "series": s["label"], "y": y}
                                     for s in c["series"] for x, y in zip(c["x"], s["y"],
                                                                          strict=True)])
        raise KeyError(f"no curve {name!r}")

    def to_record(self) -> dict:
        return self.record

    def summary(self) -> str:
        from qualbayes.evidence.plan_record import plan_text  # noqa: PLC0415

        return plan_text(self.record)

    def _repr_html_(self) -> str:
        return html_view(self.to_frame(), self.question)

    @cached_property
    def idata(self):
        """The lot-history fit of a learned prior (mu and kappa, dimension ``part``), or None:
        the plans themselves are closed forms or quadrature."""
        if not self.fits:
            return None
        from qualbayes.inference.run import to_idata  # noqa: PLC0415

        part, fit = self.fits[-1]
        return to_idata(fit.draws, fit.diverging, {k: ["part"] for k in fit.draws},
                        {"part": [part]})
