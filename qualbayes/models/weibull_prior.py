"""The prior of the Weibull life model (see :mod:`qualbayes.models.weibull` for the
densities in symbols): log shape ~ Normal or flat; scale on the cumulative hazard, a B-life,
a reliability, flat or Jeffreys; earlier data as a power-prior term."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

Z975 = 1.959963984540054  # standard normal 97.5% point

SHAPE_DEFAULT = (0.0, 1.0)  # log beta ~ N(0, 1)


@dataclass(frozen=True)
class LifePrior:
    """The prior of every group. ``shape`` is (mean, sd) of log beta, or None for flat.

    ``scale_kind`` is ``hazard`` (default), ``blife``, ``reliability`` or ``flat``;
    ``scale_args`` holds (q, mean, sd) of log B_q, or (T, mean, sd) of log H(T).
    """

    shape: tuple[float, float] | None = SHAPE_DEFAULT
    shape_given: bool = False  # from engineering knowledge (True) or the default (False)
    shape_range: tuple[float, float] | None = None
    scale_kind: str = "hazard"
    scale_args: tuple[float, float, float] = (0.0, 0.0, 1.0)
    scale_text: str = ""
    #: power-prior terms (weight, GroupStats of earlier data, label); see the module notes
    earlier: tuple = field(default=(), compare=False, repr=False)

    def describe(self, units: str = "") -> list[str]:
        u = f" {units}" if units else ""
        if self.shape is None:
            shape = "shape: flat (improper) on log(shape)"
        elif self.shape_given:
            lo, hi = self.shape_range or (0.0, 0.0)
            shape = (f"shape: lognormal with central 95% {lo:g} to {hi:g} (log shape ~ "
                     f"Normal({self.shape[0]:.4g}, {self.shape[1]:.4g}))")
        else:
            shape = ("shape: default, log shape ~ Normal(0, 1) (central 95%: 0.14 to 7.1; "
                     "weakly informative)")
        if self.scale_kind == "hazard":
            scale = ("scale: default, uniform on the cumulative hazard (t_ref/scale)^shape at "
                     "t_ref = the group's largest exact, suspension or interval-start time "
                     "(scale-free; weakly informative)")
        elif self.scale_kind == "flat":
            scale = "scale: flat (improper) on log(scale)"
        elif self.scale_kind == "blife":
            scale = f"scale: stated on a B-life, {self.scale_text}{u}"
        elif self.scale_kind == "jeffreys":
            scale = ("scale: Jeffreys rule prior, density proportional to 1/scale (with the "
                     "flat shape: uniform on log shape and log cumulative hazard; improper)")
        else:
            scale = f"scale: stated on reliability, {self.scale_text}"
        earlier = [f"earlier data (power prior): {label}, weight {w:g} - the prior is "
                   f"multiplied by their likelihood to the power {w:g}"
                   for w, _, label in self.earlier]
        return [shape, scale, *earlier]


def lognormal_from_range(lo: float, hi: float) -> tuple[float, float]:
    """(mean, sd) of log X for which (lo, hi) is the central 95% interval of X."""
    m = 0.5 * (math.log(lo) + math.log(hi))
    return m, (math.log(hi) - math.log(lo)) / (2.0 * Z975)
FLAT = LifePrior(shape=None, scale_kind="flat")
