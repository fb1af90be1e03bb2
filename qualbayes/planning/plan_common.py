"""Pieces shared by the plan questions: argument lists, wording of allowances, the record
of a plan whose learned prior failed its gate, and the wanted-assurance lines and tables."""

from __future__ import annotations

import numpy as np

from qualbayes.errors import OptionError
from qualbayes.planning.history import HistoryPrior
from qualbayes.planning.inputs import count
from qualbayes.planning.records import ASSUMPTIONS, HISTORY_ASSUMPTION, NOT_CONVERGED, record, table

MAX_OC_SERIES = 6


def allowed_list(failures) -> list[int]:
    if isinstance(failures, int | np.integer):
        failures = range(int(failures) + 1)
    out = sorted({count(c, "allowed failures") for c in failures})
    if not out:
        raise OptionError("allowed failures: give at least one value")
    return out


def allow_words(c: int) -> str:
    return "no failure" if c == 0 else "1 failure" if c == 1 else f"{c} failures"


def pct(v: float) -> str:
    return f"{100 * v:.4g}%"


def not_converged_record(kind: str, question: str, inputs: dict, history: HistoryPrior) -> dict:
    return record(
        kind, question, inputs, "no plan: the prior could not be learned", [
            question,
            f"prior from lot history of part {history.part} ({history.lots} lots): the "
            "convergence gate FAILED, so no plan is given (" + NOT_CONVERGED + ")",
            *[f"  - {r}" for r in history.gate.get("reasons", [])]],
        [], [], ASSUMPTIONS[kind] + [HISTORY_ASSUMPTION],
        priors={"history": history.describe()}, verdict=NOT_CONVERGED,
        diagnostics={history.part: history.gate})


def smallest_line(s: dict, key: str, fmt) -> str:
    if s.get(key) is None:
        return f"wanted assurance {s['target']:g}: {s['reason']}"
    head = (f"smallest plan with assurance >= {s['target']:g}: " if s["reached"] else
            f"wanted assurance {s['target']:g} not reached ({s['reason']}); best: ")
    return (head + f"{fmt(s[key])}, allowing {allow_words(s['failures'])} "
            f"(assurance {s['assurance']:.4g})")


def smallest_table(s: dict, label: str, fmt) -> dict:
    key = {"units n": "units", "test time per unit": "time", "total test time": "time"}[label]
    return table("Wanted assurance", "Smallest plan reaching the wanted assurance",
                 ["wanted assurance", "reached", label, "allowed failures", "assurance",
                  "design P(goal met)", "note"],
                 [[s["target"], s["reached"], None if s.get(key) is None else fmt(s[key]),
                   s.get("failures"), s.get("assurance"), s["design_prob_goal_met"],
                   s.get("reason", "")]])


def target_mark(target, smallest, key) -> list[dict]:
    marks = []
    if target is not None:
        marks.append({"x": None, "y": target, "label": f"wanted assurance {target:g}"})
    if smallest and smallest.get(key) is not None:
        marks.append({"x": smallest[key], "y": smallest["assurance"], "label": "smallest plan"})
    return marks
