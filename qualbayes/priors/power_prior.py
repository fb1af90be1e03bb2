r"""Borrowing from earlier data at a stated weight: the power prior.

Ibrahim & Chen (2000), "Power prior distributions for regression models", Statistical
Science 15:46, define the prior after earlier data :math:`D_0` at a weight
:math:`w \in [0, 1]` as

.. math:: \pi(\theta \mid D_0, w) \propto L(\theta \mid D_0)^{w}\, \pi_0(\theta),

so w = 0 ignores the earlier data (the initial prior :math:`\pi_0` alone) and w = 1 pools
them with the new data as if they came from the same product.

* Binomial (lots, attribute tests), :math:`\pi_0 = \mathrm{Beta}(a_0, b_0)`, earlier data x0
  defectives (failures) in n0 units: :math:`\mathrm{Beta}(a_0 + w x_0,\; b_0 + w(n_0 - x_0))`
  (closed form). Several earlier lots of one product are pooled, :math:`x_0 = \sum x_{0i}`,
  :math:`n_0 = \sum n_{0i}` (one common rate).
* Poisson (constant failure rate), :math:`\pi_0 = \mathrm{Gamma}(a_0, b_0)`, earlier r0
  failures in total time T0: :math:`\mathrm{Gamma}(a_0 + w r_0,\; b_0 + w T_0)`.
* Weibull (life): the term :math:`w \log L(\beta, \eta \mid D_0)` is added to the log prior
  (:func:`qualbayes.models.weibull.earlier_log_likelihood`); the sampler sees it like any
  other prior term.

Pure functions, except the two readers of earlier-data files at the end.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, replace

from qualbayes.errors import OptionError

WEIGHT_OPTION = "--earlier-weight"
EARLIER_OPTION = "--earlier"
_COUNT = re.compile(r"^\s*([0-9]+)\s*/\s*([0-9]+)\s*$")
_EXPOSURE = re.compile(r"^\s*([0-9]+)\s*/\s*([0-9]*\.?[0-9]+(?:[eE][-+]?[0-9]+)?)\s*$")


def parse_weight(text, option: str = WEIGHT_OPTION) -> float:
    """A weight in [0, 1]: 0.5 or 50%."""
    t = str(text).strip()
    try:
        w = float(t[:-1]) / 100.0 if t.endswith("%") else float(t)
    except ValueError:
        raise OptionError(f"{option} {text!r}: expected a weight between 0 and 1, e.g. 0.5"
                          ) from None
    if not 0.0 <= w <= 1.0:
        raise OptionError(f"{option} {text!r}: the weight must lie between 0 (ignore the "
                          "earlier data) and 1 (pool them with the new data)")
    return w


def _check_weight(w: float) -> float:
    w = float(w)
    if not 0.0 <= w <= 1.0:
        raise ValueError(f"power-prior weight {w!r} outside [0, 1]")
    return w


# --------------------------------------------------------------------------- binomial

@dataclass(frozen=True)
class EarlierCounts:
    """Earlier pass/fail evidence: ``failures`` defectives (or failures) among ``units``."""

    failures: int
    units: int
    source: str
    lots: int = 1
    sha256: str | None = None

    def __post_init__(self):
        if not 0 <= self.failures <= self.units or self.units < 1:
            raise OptionError(f"{EARLIER_OPTION} {self.source}: need 0 <= defectives <= "
                              f"units and at least one unit (got {self.failures} in "
                              f"{self.units})")

    def words(self, noun: str = "defectives") -> str:
        lots = f" over {self.lots} lots" if self.lots > 1 else ""
        return f"{self.failures} {noun} in {self.units} units{lots} ({self.source})"

    def to_dict(self) -> dict:
        return {"failures": self.failures, "units": self.units, "source": self.source,
                "lots": self.lots, "sha256": self.sha256}


def beta_power(a0: float, b0: float, earlier: EarlierCounts, weight: float
               ) -> tuple[float, float]:
    """Beta(a0 + w x0, b0 + w (n0 - x0))."""
    w = _check_weight(weight)
    return a0 + w * earlier.failures, b0 + w * (earlier.units - earlier.failures)


def parse_counts(text: str) -> EarlierCounts | None:
    """``X/N`` (X defectives or failures among N units) -> counts; None if not that form."""
    m = _COUNT.match(str(text))
    if not m:
        return None
    return EarlierCounts(int(m[1]), int(m[2]), f"stated: {m[1]} in {m[2]} units")


def counts_from_lots(path, sheet=None, columns=None) -> EarlierCounts:
    """Pool an earlier inspection file (the lots format) into x0 defectives in n0 units."""
    from qualbayes.data.lot_table import read_lots  # noqa: PLC0415
    from qualbayes.provenance import sha256_file  # noqa: PLC0415

    table = read_lots(path, sheet=sheet, columns=columns)
    f = table.frame
    return EarlierCounts(int(f["defectives"].sum()), int(f["inspected"].sum()),
                         f"file {path}", int(len(f)), sha256_file(path))


def earlier_counts(text: str, sheet=None, columns=None) -> EarlierCounts:
    """``X/N`` or an inspection file."""
    counts = parse_counts(text)
    if counts is not None:
        return counts
    return counts_from_lots(text, sheet, columns)


# --------------------------------------------------------------------------- Poisson

@dataclass(frozen=True)
class EarlierExposure:
    """Earlier constant-rate evidence: ``failures`` in total unit-time ``time``."""

    failures: int
    time: float
    source: str

    def words(self) -> str:
        return f"{self.failures} failures in {self.time:g} total unit-time ({self.source})"

    def to_dict(self) -> dict:
        return {"failures": self.failures, "time": self.time, "source": self.source}


def parse_exposure(text: str, option: str = EARLIER_OPTION) -> EarlierExposure:
    """``R/T``: R failures in a total unit-time T."""
    m = _EXPOSURE.match(str(text))
    if not m or not float(m[2]) > 0 or not math.isfinite(float(m[2])):
        raise OptionError(f"{option} {text!r}: write the earlier test as FAILURES/TIME, e.g. "
                          "2/3000 for 2 failures in 3000 unit-hours")
    return EarlierExposure(int(m[1]), float(m[2]), f"stated: {m[1]} failures in {m[2]}")


def gamma_power(a0: float, b0: float, earlier: EarlierExposure, weight: float
                ) -> tuple[float, float]:
    """Gamma(a0 + w r0, b0 + w T0) on the failure rate."""
    w = _check_weight(weight)
    return a0 + w * earlier.failures, b0 + w * earlier.time


# --------------------------------------------------------------------------- Weibull

@dataclass
class EarlierLife:
    """Earlier life data pooled into one group (all groups of the earlier file)."""

    stats: object  # qualbayes.models.weibull.GroupStats
    source: str
    sha256: str | None
    units: int
    failures: int

    def words(self) -> str:
        return f"{self.units} units with {self.failures} failures ({self.source})"

    def to_dict(self) -> dict:
        return {"source": self.source, "sha256": self.sha256, "units": self.units,
                "failures": self.failures}


def earlier_life(path, sheet=None, columns=None, units: str = "") -> EarlierLife:
    """Read an earlier life-data file (the life format) and pool its units."""
    from qualbayes.data.life import frame_arrays, read_life  # noqa: PLC0415
    from qualbayes.models.weibull import group_stats  # noqa: PLC0415
    from qualbayes.provenance import sha256_file  # noqa: PLC0415

    table = read_life(path, sheet=sheet, columns=columns, units=units)
    st = group_stats(**frame_arrays(table.frame))
    return EarlierLife(st, f"file {path}", sha256_file(path), st.units, st.failures)


def life_power_prior(prior, earlier: EarlierLife | None, weight: float):
    """The LifePrior with the earlier data's likelihood to the power w added (replacing
    any earlier-data term it had)."""
    w = _check_weight(weight)
    if earlier is None:
        return replace(prior, earlier=())
    return replace(prior, earlier=((w, earlier.stats, earlier.words()),))
