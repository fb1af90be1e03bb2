"""Priors for a lot's defect rate p, as the engineer names them on the command line."""

from __future__ import annotations

from dataclasses import dataclass

from qualbayes.errors import OptionError


@dataclass(frozen=True)
class BetaPrior:
    """p ~ Beta(a, b)."""

    a: float
    b: float
    name: str

    def describe(self) -> str:
        return f"{self.name}: p ~ Beta({self.a:g}, {self.b:g})"


UNIFORM = BetaPrior(1.0, 1.0, "uniform")
JEFFREYS = BetaPrior(0.5, 0.5, "jeffreys")
HISTORY = "history"
HISTORY_PHI_UNIFORM = "history-phi-uniform"  # the earlier hyperprior, by explicit name only


def parse_lot_prior(text: str) -> BetaPrior | str:
    """``uniform`` | ``jeffreys`` | ``beta:A,B`` | ``history`` | ``history-phi-uniform``."""
    t = text.strip().lower()
    if t == "uniform":
        return UNIFORM
    if t == "jeffreys":
        return JEFFREYS
    if t in (HISTORY, HISTORY_PHI_UNIFORM):
        return t
    if t.startswith("beta:"):
        try:
            a, b = (float(v) for v in t[5:].split(","))
        except ValueError:
            raise OptionError(f"--prior {text!r}: write beta:A,B with two numbers, "
                              "e.g. beta:0.5,200") from None
        if not (a > 0 and b > 0) or a != a or b != b or a > 1e9 or b > 1e9:
            raise OptionError(f"--prior {text!r}: A and B must be positive and finite")
        return BetaPrior(a, b, f"beta:{a:g},{b:g}")
    raise OptionError(f"--prior {text!r}: choose uniform, jeffreys, beta:A,B or history")
