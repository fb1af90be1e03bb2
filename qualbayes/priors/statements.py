r"""Prior knowledge as the engineer states it, parsed into quantile constraints.

A statement says how sure the engineer is that a quantity lies below, above or between
values. Each becomes one or two constraints :math:`\Pr(X \le v) = c` on the quantity:

==========================  =====================================  =========================
typed                       read as                                constraint(s)
==========================  =====================================  =========================
``p<0.5%@90%``              90% sure p is below 0.5%               P(p <= 0.005) = 0.90
``R>0.95@90%``              90% sure R is above 0.95               P(R <= 0.95) = 0.10
``p=0.2%``                  the median of p is 0.2%                P(p <= 0.002) = 0.50
``1.5<shape<3@90%``         90% sure the shape lies between        P(shape <= 1.5) = 0.05,
                            1.5 and 3 (a central range)            P(shape <= 3) = 0.95
==========================  =====================================  =========================

Quantities: ``p`` (defect or failure probability), ``R`` (reliability, p = 1 - R), ``R(T)``
(reliability at time T), ``shape`` and ``scale`` (Weibull), ``B10``-style lives (``Bq``),
``rate`` (constant failure rate) and ``mtbf``. Probabilities and reliabilities may be written
as 0.005, 0.5% or 5000ppm; a statement's probability as 0.9 or 90%. Each command says which
quantities it takes. Nothing here fits a distribution (see :mod:`qualbayes.priors.elicit`).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from qualbayes.errors import OptionError

OPTION = "--believe"

_NUM = r"[0-9]*\.?[0-9]+(?:[eE][-+]?[0-9]+)?"
_VAL = rf"{_NUM}\s*(?:%|ppm)?"
_QTY = rf"[A-Za-z][A-Za-z0-9.]*(?:\(\s*{_NUM}\s*\))?"
_PROB = rf"{_NUM}\s*%?"
_RANGE = re.compile(rf"^(?P<lo>{_VAL})\s*<=?\s*(?P<q>{_QTY})\s*<=?\s*(?P<hi>{_VAL})"
                    rf"\s*@\s*(?P<prob>{_PROB})$")
_BOUND = re.compile(rf"^(?P<q>{_QTY})\s*(?P<op><=?|>=?)\s*(?P<v>{_VAL})\s*@\s*(?P<prob>{_PROB})$")
_MEDIAN = re.compile(rf"^(?:median\s+)?(?P<q>{_QTY})\s*=\s*(?P<v>{_VAL})$", re.IGNORECASE)

#: quantities whose values are probabilities (written as 0.005, 0.5% or 5000ppm)
PROBABILITY_QUANTITIES = ("p", "R", "R(T)")
EXAMPLES = {
    "p": "p<0.5%@90%", "R": "R>0.95@90%", "R(T)": "R(5000)>0.9@90%",
    "shape": "1.5<shape<3@90%", "scale": "scale>4000@90%", "B": "B10>2000@90%",
    "rate": "rate<0.001@90%", "mtbf": "mtbf>1000@90%",
}


@dataclass(frozen=True)
class Statement:
    """One statement: ``kind`` is below, above, median or between; ``values`` one value (two
    for between); ``prob`` how sure (0.5 for a median; the central coverage for between)."""

    text: str
    quantity: str  # canonical: p, R, R(5000), shape, scale, B10, rate, mtbf
    kind: str
    values: tuple[float, ...]
    prob: float

    @property
    def family_key(self) -> str:
        """The quantity's kind: p, R, R(T), shape, scale, B, rate or mtbf."""
        if self.quantity.startswith("R("):
            return "R(T)"
        if self.quantity.startswith("B"):
            return "B"
        return self.quantity

    @property
    def time(self) -> float | None:
        """T of an R(T) statement, q (as a fraction) of a Bq statement, else None."""
        if self.quantity.startswith("R("):
            return float(self.quantity[2:-1])
        if self.quantity.startswith("B"):
            return float(self.quantity[1:]) / 100.0
        return None

    def constraints(self) -> list[tuple[float, float]]:
        """(value, P(quantity <= value)) pairs."""
        if self.kind == "below":
            return [(self.values[0], self.prob)]
        if self.kind == "above":
            return [(self.values[0], 1.0 - self.prob)]
        if self.kind == "median":
            return [(self.values[0], 0.5)]
        tail = (1.0 - self.prob) / 2.0
        return [(self.values[0], tail), (self.values[1], 1.0 - tail)]

    def words(self) -> str:
        q = self.quantity
        show = [format_value(v, self.family_key) for v in self.values]
        if self.kind == "below":
            return f"{100 * self.prob:.4g}% sure that {q} is below {show[0]}"
        if self.kind == "above":
            return f"{100 * self.prob:.4g}% sure that {q} is above {show[0]}"
        if self.kind == "median":
            return f"{q} is as likely below {show[0]} as above it (median {show[0]})"
        return (f"{100 * self.prob:.4g}% sure that {q} lies between {show[0]} and {show[1]} "
                "(a central range)")

    def to_dict(self) -> dict:
        return {"text": self.text, "quantity": self.quantity, "kind": self.kind,
                "values": list(self.values), "prob": self.prob, "words": self.words()}


def format_value(v: float, family_key: str) -> str:
    """A defect or failure probability in percent; reliabilities and other values plain."""
    if family_key == "p":
        return f"{100 * v:.4g}%"
    return f"{v:.6g}"


def split_statements(texts) -> list[str]:
    """The statements of a repeated option, each of which may hold several separated by ';'."""
    if texts is None:
        return []
    if isinstance(texts, str):
        texts = [texts]
    out = []
    for t in texts:
        out += [s.strip() for s in str(t).split(";") if s.strip()]
    return out


def parse_statements(texts, allowed: tuple[str, ...], option: str = OPTION) -> list[Statement]:
    """Parse every statement; ``allowed`` lists the quantity kinds this question takes
    (from p, R, R(T), shape, scale, B, rate, mtbf)."""
    out = [parse_statement(t, option) for t in split_statements(texts)]
    for s in out:
        if s.family_key not in allowed:
            takes = " or ".join(_name(k) for k in allowed)
            raise OptionError(f"{option} {s.text!r}: a statement on {s.quantity} does not "
                              f"apply here; this question takes statements on {takes}, e.g. "
                              f"{EXAMPLES[allowed[0]]!r}")
    return out


def _name(key: str) -> str:
    return {"R(T)": "R(T)", "B": "a B-life (B10, B1, ...)"}.get(key, key)


def parse_statement(text: str, option: str = OPTION) -> Statement:
    """One statement, or an :class:`OptionError` saying what is wrong with it."""
    raw = str(text).strip()
    t = re.sub(r"\s+", " ", raw)
    if "," in t:
        raise OptionError(f"{option} {raw!r}: write numbers without thousands separators or "
                          "decimal commas (e.g. 2000, 0.5%), and separate statements with ';'")
    m = _RANGE.match(t)
    if m:
        q = _quantity(m["q"], raw, option)
        lo, hi = _value(m["lo"], q, raw, option), _value(m["hi"], q, raw, option)
        if not lo < hi:
            raise OptionError(f"{option} {raw!r}: the lower end of a range must be below its "
                              "upper end")
        return Statement(raw, q, "between", (lo, hi), _prob(m["prob"], raw, option))
    m = _BOUND.match(t)
    if m:
        q = _quantity(m["q"], raw, option)
        kind = "below" if m["op"].startswith("<") else "above"
        return Statement(raw, q, kind, (_value(m["v"], q, raw, option),),
                         _prob(m["prob"], raw, option))
    m = _MEDIAN.match(t)
    if m:
        q = _quantity(m["q"], raw, option)
        return Statement(raw, q, "median", (_value(m["v"], q, raw, option),), 0.5)
    if re.search(r"[<>]", t) and "@" not in t:
        raise OptionError(f"{option} {raw!r}: say how sure you are, e.g. {t}@90% "
                          "(90% sure)")
    raise OptionError(f"{option} {raw!r}: not a statement. Write e.g. 'p<0.5%@90%' (90% "
                      "sure p is below 0.5%), 'p=0.2%' (median 0.2%) or '1.5<shape<3@90%' "
                      "(90% sure the shape lies between 1.5 and 3)")


def _quantity(token: str, raw: str, option: str) -> str:
    t = token.replace(" ", "")
    low = t.lower()
    if low in ("p", "shape", "scale", "rate", "mtbf"):
        return low
    if t == "R" or low == "r":
        return "R"
    m = re.fullmatch(rf"[Rr]\(({_NUM})\)", t)
    if m:
        time = float(m[1])
        if not (time > 0 and math.isfinite(time)):
            raise OptionError(f"{option} {raw!r}: the time in R(T) must be positive")
        return f"R({time:g})"
    m = re.fullmatch(rf"[Bb]({_NUM})", t)
    if m:
        pct = float(m[1])
        if not 0 < pct < 100:
            raise OptionError(f"{option} {raw!r}: a B-life's percentage must lie strictly "
                              "between 0 and 100 (B10: the life by which 10% have failed)")
        return f"B{pct:g}"
    raise OptionError(f"{option} {raw!r}: unknown quantity {token!r}; use p, R, R(T), shape, "
                      "scale, B10 (any Bq), rate or mtbf")


def _value(token: str, quantity: str, raw: str, option: str) -> float:
    t = token.replace(" ", "").lower()
    unit = "%" if t.endswith("%") else "ppm" if t.endswith("ppm") else ""
    value = float(t[: len(t) - len(unit)])
    is_prob = quantity in ("p", "R") or quantity.startswith("R(")
    if unit and not is_prob:
        raise OptionError(f"{option} {raw!r}: {quantity} is not a probability; give it as a "
                          "plain number")
    value = value / 100.0 if unit == "%" else value / 1e6 if unit == "ppm" else value
    if not math.isfinite(value):
        raise OptionError(f"{option} {raw!r}: the value must be finite")
    if is_prob and not 0.0 < value < 1.0:
        raise OptionError(f"{option} {raw!r}: {quantity} is a probability; its value must lie "
                          "strictly between 0 and 1 (0% and 100%)")
    if not is_prob and not value > 0.0:
        raise OptionError(f"{option} {raw!r}: {quantity} is positive; its value must be > 0")
    return value


def _prob(token: str, raw: str, option: str) -> float:
    t = token.replace(" ", "")
    value = float(t[:-1]) / 100.0 if t.endswith("%") else float(t)
    if not 0.0 < value < 1.0:
        raise OptionError(
            f"{option} {raw!r}: how sure you are must lie strictly between 0 and 1 (0% and "
            "100%). Certainty (100%) or impossibility (0%) cannot be held by a prior of these "
            "families, and a prior that rules values out could never learn from the data")
    return value
