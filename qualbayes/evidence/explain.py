"""Plain words under the terminal's tables: what the less obvious columns mean, what the
sampler checks found, and what to do next."""

from __future__ import annotations

from qualbayes.evidence.numbers import count, quantity
from qualbayes.inference.gate import DIVERGENCES_MAX, ESS_MIN, RHAT_MAX

NEXT_STEP = ("next: add --report DIR for an audit report (HTML and PDF with sign-off block), "
             "--out DIR for the evidence workbook, --json for a machine-readable record")

#: share of lots outside the prior's expected range above which the output gives advice
MANY_OUTSIDE = 0.25


def gate_line(name: str, gate: dict, no_answer: str) -> str:
    """The convergence gate of one fit in words."""
    ess = min(gate.get("min_ess_bulk") or 0, gate.get("min_ess_tail") or 0)
    worst = (f"R-hat at most {quantity(gate.get('max_rhat'), 4)} (limit {RHAT_MAX}), "
             f"effective draws at least {count(ess)} (needed {ESS_MIN:.0f}), "
             f"{gate.get('divergences')} divergent transitions (allowed {DIVERGENCES_MAX})")
    if gate.get("passed"):
        return f"sampler checks passed for {name}: {worst}"
    return f"sampler checks FAILED for {name}, {no_answer}: {worst}"


def lots_columns(finite: bool, confidence: float) -> str:
    note = ("columns: n units inspected, x defectives found, N lot size; basis: what was "
            "decided about (the lot's own fraction defective, or the process rate p); "
            f"rate {confidence:.0%} upper: the one-sided upper bound of p; P(within): the "
            "probability behind the decision (MCSE: its Monte Carlo error); clean units to "
            "accept: how many more units inspected with no defective would let the lot be "
            "accepted; own data: the decision the lot's own data give under the uniform prior, "
            "shown where it differs; check: OUTLIER when the lot does not look like the others "
            "of its history")
    if finite:
        note += (f"; units left: the lot's units not inspected, with the defectives predicted "
                 f"among them (median and {confidence:.0%} upper bound)")
    return note + "."


def life_columns(confidence: float) -> str:
    return ("columns: fail failures, susp suspensions (units removed or still running); "
            "shape, scale and B10 (the time by which 10% fail) as medians with their "
            f"intervals; {confidence:.0%} lower: the one-sided lower bound of R at the "
            "mission time; P(R>=target) the probability that the requirement is met.")


def prior_range_advice(predictive: dict | None) -> list[str]:
    """Advice when many lots fall outside the range the stated prior expects."""
    if not predictive or not predictive.get("checked"):
        return []
    outside, checked = len(predictive.get("outside") or []), predictive["checked"]
    if outside / checked <= MANY_OUTSIDE:
        return []
    return [f"advice: {outside} of {checked} lots fall outside the range this prior expects, "
            "so the prior disagrees with the data; check the stated belief or the earlier "
            "data, and compare with --sensitivity before relying on the decisions."]


HISTORY_NOTE = ("prior history: the lots of each part share a typical defect rate and a "
                "lot-to-lot spread learned from all of them, so a lot with little data "
                "borrows strength from its part's other lots (docs/lots.md)")
