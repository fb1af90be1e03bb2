r"""Would the decision change under another prior? The question rerun under a fixed set.

The set, for every question (rows that coincide are shown once, their names joined):

1. **as run** - the prior the analysis used;
2. **uniform** and 3. **Jeffreys** - the two reference choices (Beta(1, 1) and
   Beta(1/2, 1/2) for a probability; a flat Gamma(1, 0) and Gamma(1/2, 0) for a failure
   rate; for the Weibull see :mod:`qualbayes.priors.life_sensitivity`);
4. **stated** - the prior elicited from the engineer's statements, if any;
5.-7. **earlier data at weights 0, 0.5 and 1** - the power prior on the initial prior, if
   earlier data were given (weight 0 is the initial prior itself);
8. **sceptical** - deliberately against the product: the uniform (flat, default) prior plus
   one defective or failure's worth of evidence: Beta(2, 1), whose density rises with p;
   Gamma(2, 0); for the Weibull, one failure at the mission time. It asks "would one more
   bad unit change the decision?".

For a sampling plan (n, c), which has no confidence of its own, the question is the Bayesian
view's: is an accepted lot within the limit s with probability at least the stated level
(:func:`qualbayes.planning.sampling.accepted_within`)? The priors there are on the defect
rate of the lots offered.

Closed forms throughout (conjugate Beta and gamma posteriors): rerunning costs microseconds.
Each row reports the key probability and the decision, exactly as a separate run with that
prior would (the tests check this), and each item (lot, plan row) a sentence saying whether
the decision depends on the prior, e.g. "accept under 5 of 7 priors; undecided under the
sceptical prior".
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from scipy import special

from qualbayes.questions import decide

WEIGHTS = (0.0, 0.5, 1.0)
DEMONSTRATED, NOT_DEMONSTRATED = "demonstrated", "not demonstrated"
NOT_USABLE = "not usable"


@dataclass(frozen=True)
class PriorRow:
    """One prior of the set. ``params``: beta {a, b}; gamma {a, rate}; other families carry
    what their runner needs. ``phrase`` names it inside a sentence."""

    key: str
    label: str
    family: str
    params: dict
    prior: str
    why: str
    phrase: str = ""
    extra: dict = field(default_factory=dict)

    def same_as(self, other: PriorRow) -> bool:
        if self.family != other.family or self.family not in ("beta", "gamma"):
            return False
        return all(math.isclose(self.params[k], other.params[k], rel_tol=1e-12, abs_tol=1e-300)
                   for k in self.params)

    def to_dict(self) -> dict:
        return {"key": self.key, "label": self.label, "family": self.family,
                "params": dict(self.params), "prior": self.prior, "why": self.why,
                **self.extra}


def merge_duplicates(rows: list[PriorRow]) -> list[PriorRow]:
    """One row per distinct prior; the names of rows it stands for are joined."""
    out: list[PriorRow] = []
    for r in rows:
        for k, kept in enumerate(out):
            if kept.same_as(r):
                out[k] = PriorRow(kept.key, f"{kept.label} = {r.label}", kept.family,
                                  kept.params, kept.prior, f"{kept.why} {r.why}",
                                  kept.phrase, kept.extra)
                break
        else:
            out.append(r)
    return out


# --------------------------------------------------------------------------- row sets

def _beta_row(key, label, a, b, why, phrase, what="p") -> PriorRow:
    return PriorRow(key, label, "beta", {"a": float(a), "b": float(b)},
                    f"{what} ~ Beta({a:.6g}, {b:.6g})", why, phrase)


def beta_rows(as_run: PriorRow | None, stated=None, base: tuple[float, float, str] | None = None,
              earlier=None, what: str = "p") -> list[PriorRow]:
    """The set for a probability p (lots, attribute plans). ``as_run`` is the analysis
    prior's row (None for a classical plan: then the classical rule is row one);
    ``stated`` an :class:`~qualbayes.priors.elicit.Elicited`; ``base`` the initial prior
    (a0, b0, words) of the power prior and ``earlier`` the earlier counts."""
    from qualbayes.priors.power_prior import beta_power  # noqa: PLC0415

    rows = [as_run] if as_run is not None else []
    rows += [
        _beta_row("uniform", "uniform", 1.0, 1.0, "Uniform on (0, 1): every rate equally "
                  "likely.", "the uniform prior", what),
        _beta_row("jeffreys", "Jeffreys", 0.5, 0.5, "Jeffreys prior of the binomial "
                  "(invariant to reparametrisation).", "the Jeffreys prior", what)]
    if stated is not None:
        rows.append(_beta_row("stated", "stated", stated.params["a"], stated.params["b"],
                              "Elicited from your statements.", "the stated prior", what))
    if earlier is not None and base is not None:
        a0, b0, words = base
        for w in WEIGHTS:
            a, b = beta_power(a0, b0, earlier, w)
            rows.append(_beta_row(f"earlier-{w:g}", f"earlier data, weight {w:g}", a, b,
                                  f"Power prior: {words} times the earlier data "
                                  f"({earlier.words()}) to the power {w:g}.",
                                  f"the earlier data at weight {w:g}", what))
    rows.append(_beta_row("sceptical", "sceptical", 2.0, 1.0,
                          "Deliberately sceptical: the uniform prior plus one defective's "
                          "worth of evidence (density rising with p).",
                          "the sceptical prior", what))
    return merge_duplicates(rows)


def _gamma_row(key, label, a, rate, why, phrase) -> PriorRow:
    improper = " (improper; proper after any test time)" if rate == 0 else ""
    return PriorRow(key, label, "gamma", {"a": float(a), "rate": float(rate)},
                    f"failure rate ~ Gamma(shape {a:.6g}, rate {rate:.6g}){improper}", why,
                    phrase)


def gamma_rows(as_run: PriorRow | None, stated=None, base: tuple[float, float, str] | None = None,
               earlier=None) -> list[PriorRow]:
    """The set for a constant failure rate (MTBF plans)."""
    from qualbayes.priors.power_prior import gamma_power  # noqa: PLC0415

    rows = [as_run] if as_run is not None else []
    rows += [
        _gamma_row("uniform", "flat", 1.0, 0.0, "Flat on the failure rate; its Bayesian test "
                   "equals the classical chi-square test.", "the flat prior"),
        _gamma_row("jeffreys", "Jeffreys", 0.5, 0.0, "Jeffreys prior of the Poisson rate.",
                   "the Jeffreys prior")]
    if stated is not None:
        rows.append(_gamma_row("stated", "stated", stated.params["a"], stated.params["rate"],
                               "Elicited from your statements.", "the stated prior"))
    if earlier is not None and base is not None:
        a0, b0, words = base
        for w in WEIGHTS:
            a, b = gamma_power(a0, b0, earlier, w)
            rows.append(_gamma_row(f"earlier-{w:g}", f"earlier data, weight {w:g}", a, b,
                                   f"Power prior: {words} times the earlier data "
                                   f"({earlier.words()}) to the power {w:g}.",
                                   f"the earlier data at weight {w:g}"))
    rows.append(_gamma_row("sceptical", "sceptical", 2.0, 0.0,
                           "Deliberately sceptical: the flat prior plus one failure's worth "
                           "of evidence.", "the sceptical prior"))
    return merge_duplicates(rows)


# --------------------------------------------------------------------------- sentences

def item_summary(results: list[dict], rows: list[PriorRow]) -> tuple[str, bool]:
    """"accept under 5 of 7 priors; undecided under the sceptical prior" and whether the
    decision depends on the prior. ``results[k]`` belongs to ``rows[k]``; rows that are not
    usable are left out of the count."""
    groups: dict[str, list[str]] = {}
    for res, row in zip(results, rows, strict=True):
        if res["decision"] == NOT_USABLE:
            continue
        groups.setdefault(res["decision"], []).append(row.phrase or row.label)
    counted = sum(len(v) for v in groups.values())
    if not groups:
        return "no prior of the set could be used", False
    if len(groups) == 1:
        (d, _), = groups.items()
        return f"{d} under all {counted} priors: the decision does not depend on the prior", \
            False
    (d1, first), *others = groups.items()
    parts = [f"{d1} under {len(first)} of {counted} priors"]
    parts += [f"{d} under {_join(names)}" for d, names in others]
    return "; ".join(parts), True


def _join(names: list[str]) -> str:
    return names[0] if len(names) == 1 else ", ".join(names[:-1]) + " and " + names[-1]


def overall(items: list[dict], noun: str) -> str:
    moved = [i["name"] for i in items if i["depends"]]
    n = len(items)
    if not moved:
        return (f"No {noun}'s decision depends on the prior: each is the same under every "
                "prior of the set.")
    shown = ", ".join(str(m) for m in moved[:12]) + (", ..." if len(moved) > 12 else "")
    return (f"The decision depends on the prior for {len(moved)} of {n} {noun}s ({shown}); "
            "read those with the prior in mind.")


def section(question: str, confidence: float, rows: list[PriorRow], items: list[dict],
             noun: str, predictive: list | None = None) -> dict:
    priors = [r.to_dict() for r in rows]
    for p, pred in zip(priors, predictive or [None] * len(rows), strict=True):
        p["predictive"] = pred
    return {"question": question, "confidence": confidence, "priors": priors,
            "items": items, "noun": noun, "summary": overall(items, noun)}


# --------------------------------------------------------------------------- lots

def lots_sensitivity(frame, spec: float, confidence: float, rows: list[PriorRow],
                     as_run: dict | None = None, beta_answers=None) -> dict:
    """Every lot under every prior. ``frame``: lots with lot, defectives, inspected;
    ``as_run``: {"prob": [...], "decision": [...]} of the analysis itself, used for the first
    row when it is not a Beta (the history prior); ``beta_answers(a, b)``: (probs,
    decisions) of every lot under Beta(a, b) as the analysis answers them (default: the
    process rate, P(p <= spec))."""
    from qualbayes.priors.predictive import lots_predictive  # noqa: PLC0415

    x = frame["defectives"].to_numpy(float)
    n = frame["inspected"].to_numpy(float)
    per_row = []
    for row in rows:
        if row.family == "beta" and beta_answers is not None:
            probs, decisions = beta_answers(row.params["a"], row.params["b"])
            per_row.append([(float(p), d) for p, d in zip(probs, decisions, strict=True)])
        elif row.family == "beta":
            a, b = row.params["a"], row.params["b"]
            prob = special.betainc(a + x, b + n - x, spec)
            per_row.append([(float(p), decide(float(p), confidence)) for p in prob])
        else:
            per_row.append([(None if p is None else float(p), d) for p, d in
                            zip(as_run["prob"], as_run["decision"], strict=True)])
    items = []
    for i, name in enumerate(frame["lot"]):
        results = [{"prior": row.key, "prob": per_row[k][i][0], "decision": per_row[k][i][1]}
                   for k, row in enumerate(rows)]
        text, depends = item_summary(results, rows)
        items.append({"name": name, "results": results, "summary": text, "depends": depends})
    lots = [(str(name), int(xi), int(ni)) for name, xi, ni in zip(frame["lot"], x, n,
                                                                   strict=True)]
    predictive = [lots_predictive(r.params["a"], r.params["b"], lots) if r.family == "beta"
                  else {"range": None, "words": "learned from these lots: see the next-lot "
                                                "predictive"} for r in rows]
    return section(f"P(p <= {spec:g} | data) >= {confidence:g}?", confidence, rows, items,
                    "lot", predictive)


#: the plan questions live in :mod:`qualbayes.priors.plan_sensitivity`; importable from here
_PLAN_NAMES = ("attribute_sensitivity", "gamma_test_time", "mtbf_sensitivity",
               "sampling_sensitivity", "life_plan_sensitivity", "life_plan_predictive")


def __getattr__(name: str):
    if name in _PLAN_NAMES:
        from qualbayes.priors import plan_sensitivity  # noqa: PLC0415

        return getattr(plan_sensitivity, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
