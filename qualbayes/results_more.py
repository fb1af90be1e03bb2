"""Result objects of the supplier scorecard, the at-use question and the field-return
forecast: frozen, with the same face as :mod:`qualbayes.results` (``to_frame()``,
``summary()``, ``_repr_html_()``, ``to_record()``, ``converged``, ``idata``).

``to_record()`` is the run record the command line writes for the same question (built by
the same evidence builders); ``summary()`` is the text it prints. ``idata`` is the MCMC fit
behind the answer as an ``arviz.InferenceData`` (posterior with named dimensions and
coordinates, ``sample_stats.diverging``, observed data), built on first use.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import pandas as pd

from qualbayes.results import html_view, python_command


def _named_dims(draws: dict, sizes: dict[str, list[str]]) -> tuple[dict, dict]:
    """Dimension names for the trailing axis of each draw array, matched by length against
    ``sizes`` ({dimension: labels}; the first match wins); arrays of other shapes keep
    ArviZ's default names."""
    dims, coords = {}, {}
    for name, v in draws.items():
        shape = np.shape(v)[2:]
        if len(shape) != 1:
            continue
        for dim, labels in sizes.items():
            if len(labels) == shape[0]:
                dims[name] = [dim]
                coords[dim] = list(labels)
                break
    return dims, coords


def _idata_of_fit(fit, sizes: dict, observed: dict, observed_dims: dict,
                  observed_coords: dict):
    from qualbayes.inference.run import to_idata  # noqa: PLC0415

    dims, coords = _named_dims(fit.draws, sizes)
    dims = {**dims, **(fit.dims or {})}
    return to_idata(fit.draws, fit.diverging, dims,
                    {**coords, **(fit.coords or {}), **observed_coords}, observed,
                    observed_dims)


# --------------------------------------------------------------------------- suppliers

@dataclass(frozen=True)
class SupplierResult:
    """The supplier scorecard: each supplier's defect rate against the limit, against its
    own past (per period) and against the other suppliers (hierarchical model, NUTS)."""

    suppliers: pd.DataFrame
    periods: pd.DataFrame
    spec: float
    confidence: float
    period: str | None
    seed: int
    assessment: object = field(repr=False, compare=False)  # scorecard.SupplierScorecard
    table: object = field(repr=False, compare=False)  # data.lot_table.LotTable
    sha256: str | None = field(default=None, repr=False)
    options: dict = field(default_factory=dict, repr=False)
    fits: tuple = field(default=(), repr=False, compare=False)

    @property
    def converged(self) -> bool:
        return bool(self.assessment.converged)

    def to_frame(self) -> pd.DataFrame:
        """One row per supplier, worst first: lots, units, defectives, the posterior rate
        (median, upper bound), P(rate > limit), P(latest period worse), P(worst) with their
        Monte Carlo errors, and the calls."""
        return self.suppliers.copy()

    def to_record(self) -> dict:
        from qualbayes.evidence.suppliers_record import suppliers_record  # noqa: PLC0415
        from qualbayes.provenance import versions  # noqa: PLC0415

        return suppliers_record(self.assessment, self.table, self.sha256 or "",
                                python_command("assess_suppliers", self.options), versions())

    def summary(self) -> str:
        from qualbayes.evidence.suppliers_record import suppliers_text  # noqa: PLC0415

        return suppliers_text(self.to_record())

    def _repr_html_(self) -> str:
        return html_view(self.to_frame(), f"suppliers against the limit {self.spec:g} at "
                                      f"confidence {self.confidence:g}")

    @cached_property
    def idata(self):
        """The hierarchical fit: per-supplier arrays on dimension ``supplier``, per-cell
        (supplier and period) arrays on ``cell``; the lots as observed data."""
        if not self.fits:
            return None
        from qualbayes.scorecard import scorecard_cells  # noqa: PLC0415

        suppliers, cells = scorecard_cells(self.table, self.period)
        cell_names = [f"{suppliers[c[0]]} {c[1]}" for c in cells]
        sizes = {"supplier": list(suppliers), "cell": cell_names}
        if len(cells) == len(suppliers):  # no periods: one cell per supplier
            sizes = {"supplier": list(suppliers)}
        f = self.table.frame
        observed = {"defectives": f["defectives"].to_numpy(int),
                    "inspected": f["inspected"].to_numpy(int)}
        return _idata_of_fit(self.fits[-1], sizes, observed,
                             {k: ["lot"] for k in observed},
                             {"lot": f["lot"].astype(str).tolist()})


# --------------------------------------------------------------------------- at use

@dataclass(frozen=True)
class AtUseResult:
    """Reliability at the use condition from units tested at raised stress:
    P(R_use(mission) >= target | data) >= confidence?"""

    mission: float
    target: float
    confidence: float
    distribution: str
    decision: str
    assessment: object = field(repr=False, compare=False)  # AcceleratedAssessment
    table: object = field(repr=False, compare=False)  # data.stress_life.StressLifeTable
    sha256: str | None = field(default=None, repr=False)
    options: dict = field(default_factory=dict, repr=False)
    fits: tuple = field(default=(), repr=False, compare=False)

    @property
    def converged(self) -> bool:
        return bool(self.assessment.converged)

    def to_frame(self) -> pd.DataFrame:
        """One row: counts, R(mission) at use (median, interval, lower bound), B1 and B10 at use,
        P(R >= target) with its Monte Carlo error, the decision and the gate."""
        r = self.assessment.result
        row = {"units": r["units"], "failures": r["failures"]}
        for key in ("reliability_at_mission", "b1_at_use", "b10_at_use"):
            s = r.get(key) or {}
            lo, hi = s.get("interval") or (None, None)
            row |= {f"{key}_median": s.get("median"), f"{key}_low": lo, f"{key}_high": hi}
        rel = r.get("reliability_at_mission") or {}
        row |= {"reliability_lower_bound": rel.get("lower_bound"),
                "prob_meets_target": r.get("prob_meets_target"),
                "prob_meets_target_mcse": r.get("prob_meets_target_mc_error"),
                "decision": r["decision"], "converged": self.converged}
        return pd.DataFrame([row])

    def to_record(self) -> dict:
        from qualbayes.evidence.accelerated_plots import stress_points  # noqa: PLC0415
        from qualbayes.evidence.accelerated_record import at_use_record  # noqa: PLC0415
        from qualbayes.provenance import versions  # noqa: PLC0415

        record = at_use_record(self.assessment, self.table, self.sha256 or "",
                               python_command("assess_at_use", self.options), versions())
        record["points"] = stress_points(self.table)
        return record

    def summary(self) -> str:
        from qualbayes.evidence.accelerated_record import at_use_text  # noqa: PLC0415

        return at_use_text(self.to_record())

    def _repr_html_(self) -> str:
        return html_view(self.to_frame(), f"P(R_use({self.mission:g}) >= {self.target:g} | data) "
                                      f">= {self.confidence:g}? ({self.distribution})")

    @cached_property
    def idata(self):
        """The fit behind the answer (the common-shape model; after extra draws of a close
        call, that fit): ``theta`` on dimension ``coefficient`` (log sigma, the location
        gamma0 at the reference stress, each stress's scaled coefficient); the units and
        their stresses as observed data. None when the gate failed (no draws are kept)."""
        theta = self.assessment.theta
        fit = next((f for f in reversed(self.fits)
                    if f.draws.get("theta") is not None and f.draws["theta"] is theta), None)
        if fit is None:
            return None
        k = np.shape(theta)[-1]
        f = self.table.life.frame
        observed = {"lower": f["lower"].to_numpy(float), "upper": f["upper"].to_numpy(float),
                    "kind": f["kind"].astype(str).to_numpy()}
        for j, col in enumerate(self.table.columns):
            observed[f"stress[{col}]"] = np.asarray(self.table.stress)[:, j]
        # theta = (log sigma, gamma0 at the reference stress, scaled coefficient per stress)
        names = ["log_sigma", "gamma0"] + [f"scaled[{t.column}]" for t in self.assessment.terms]
        if len(names) != k:
            names = [f"theta_{i}" for i in range(k)]
        return _idata_of_fit(fit, {"coefficient": names}, observed,
                             {key: ["unit"] for key in observed},
                             {"unit": f["unit"].astype(str).tolist()})


# --------------------------------------------------------------------------- returns

@dataclass(frozen=True)
class ForecastResult:
    """How many units in service will fail in each coming period, and in total (posterior
    predictive of a Weibull life fit)."""

    horizon: int
    period: str
    usage: float
    confidence: float
    forecast: dict | None = field(repr=False)
    life: dict = field(repr=False)
    question: dict = field(repr=False)
    fleet: object = field(repr=False, compare=False)  # data.fleet.FleetTable
    sha256: dict = field(default_factory=dict, repr=False)
    options: dict = field(default_factory=dict, repr=False)
    fits: tuple = field(default=(), repr=False, compare=False)
    life_table: object = field(default=None, repr=False, compare=False)

    @property
    def converged(self) -> bool:
        return bool(self.life["diagnostics"]["passed"])

    def to_frame(self) -> pd.DataFrame:
        """One row per group and coming period (group "all" for all units together):
        expected failures, the predictive median and central interval of the count and of
        the cumulative count. Empty when the life fit failed its gate (no forecast)."""
        if self.forecast is None:
            return pd.DataFrame()
        rows = []
        for g in [self.forecast["overall"], *self.forecast["groups"]]:
            for p in g["periods"]:
                rows.append({"group": g["group"], "period": p["period"],
                             "expected": p["expected"], "median": p["median"],
                             "low": p["interval"][0], "high": p["interval"][1],
                             "cumulative_median": p["cumulative_median"],
                             "cumulative_low": p["cumulative_interval"][0],
                             "cumulative_high": p["cumulative_interval"][1]})
        return pd.DataFrame(rows)

    def to_record(self) -> dict:
        from qualbayes.evidence.forecast_record import returns_record  # noqa: PLC0415
        from qualbayes.provenance import versions  # noqa: PLC0415

        return returns_record(self.forecast, dict(self.life), self.fleet, self.sha256,
                              python_command("forecast_returns", self.options), versions(),
                              self.question)

    def summary(self) -> str:
        from qualbayes.evidence.forecast_record import returns_text  # noqa: PLC0415

        return returns_text(self.to_record())

    def _repr_html_(self) -> str:
        return html_view(self.to_frame(), f"failures per {self.period} over the next "
                                      f"{self.horizon} {self.period}s")

    @cached_property
    def idata(self):
        """The Weibull life fit (log shape and log scale on dimension ``group``) with the
        life data as observed data."""
        if not self.fits:
            return None
        f = self.life_table.frame
        observed = {"lower": f["lower"].to_numpy(float), "upper": f["upper"].to_numpy(float),
                    "kind": f["kind"].astype(str).to_numpy()}
        return self.fits[-1].to_idata(observed, {k: ["unit"] for k in observed},
                                      {"unit": f["unit"].astype(str).tolist()})
