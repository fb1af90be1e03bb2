"""The convergence gate: no decision is reported from chains that fail it.

Thresholds follow Vehtari, Gelman, Simpson, Carpenter & Buerkner (2021), "Rank-normalization,
folding, and localization: an improved R-hat", Bayesian Analysis 16:667: rank-normalised
split R-hat <= 1.01 and bulk and tail ESS >= 400 (100 per chain for 4 chains), and no
divergent transitions. The older "R-hat < 1.1, ESS >= 100" rule is not used (see docs).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

RHAT_MAX = 1.01
ESS_MIN = 400.0
DIVERGENCES_MAX = 0


@dataclass
class ParamDiagnostics:
    name: str
    rhat: float
    ess_bulk: float
    ess_tail: float

    @property
    def passed(self) -> bool:  # NaN compares False: an undefined diagnostic never passes
        return self.rhat <= RHAT_MAX and self.ess_bulk >= ESS_MIN and self.ess_tail >= ESS_MIN


@dataclass
class GateResult:
    params: list[ParamDiagnostics]
    divergences: int
    attempts: int = 1
    settings: dict = field(default_factory=dict)

    @property
    def passed(self) -> bool:
        return self.divergences <= DIVERGENCES_MAX and all(p.passed for p in self.params)

    @property
    def max_rhat(self) -> float:
        return _worst([p.rhat for p in self.params], max)

    @property
    def min_ess_bulk(self) -> float:
        return _worst([p.ess_bulk for p in self.params], min)

    @property
    def min_ess_tail(self) -> float:
        return _worst([p.ess_tail for p in self.params], min)

    def reasons(self) -> list[str]:
        out = []
        if self.divergences > DIVERGENCES_MAX:
            out.append(f"{self.divergences} divergent transitions (allowed {DIVERGENCES_MAX})")
        for p in self.params:
            if not all(math.isfinite(v) for v in (p.rhat, p.ess_bulk, p.ess_tail)):
                # e.g. every draw equal (a quantity pinned at 0 or 1, or chains that never
                # moved): convergence cannot be judged, so the gate does not pass
                out.append(f"R-hat and ESS of {p.name} cannot be computed (every draw within "
                           "a chain is the same, or not a number); convergence is not shown")
                continue
            if p.rhat > RHAT_MAX:
                out.append(f"R-hat of {p.name} is {p.rhat:.3f} (> {RHAT_MAX})")
            if p.ess_bulk < ESS_MIN:
                out.append(f"bulk ESS of {p.name} is {p.ess_bulk:.0f} (< {ESS_MIN:.0f})")
            if p.ess_tail < ESS_MIN:
                out.append(f"tail ESS of {p.name} is {p.ess_tail:.0f} (< {ESS_MIN:.0f})")
        return out

    def summary(self) -> str:
        status = "passed" if self.passed else "FAILED"
        return (f"convergence gate {status}: max R-hat {self.max_rhat:.4f}, min bulk ESS "
                f"{self.min_ess_bulk:.0f}, min tail ESS {self.min_ess_tail:.0f}, "
                f"divergences {self.divergences}, attempts {self.attempts}")

    def select(self, tag: str) -> GateResult:
        """The parameters labelled ``name[tag]`` (e.g. one part of a joint fit). Divergences
        belong to the joint sampler and are kept whole."""
        chosen = [p for p in self.params if p.name.endswith(f"[{tag}]")]
        return GateResult(chosen, self.divergences, self.attempts, self.settings)

    def to_dict(self) -> dict:
        return {
            "passed": self.passed,
            "thresholds": {"rhat_max": RHAT_MAX, "ess_bulk_min": ESS_MIN,
                           "ess_tail_min": ESS_MIN, "divergences_max": DIVERGENCES_MAX},
            "max_rhat": self.max_rhat,
            "min_ess_bulk": self.min_ess_bulk,
            "min_ess_tail": self.min_ess_tail,
            "divergences": self.divergences,
            "attempts": self.attempts,
            "settings": self.settings,
            "parameters": [asdict(p) | {"passed": p.passed} for p in self.params],
            "reasons": self.reasons(),
        }


def _worst(values: list[float], pick) -> float:
    """max/min that lets an undefined (NaN) diagnostic show instead of hiding it."""
    return float("nan") if any(math.isnan(v) for v in values) else pick(values)


def diagnose(draws: dict, divergences: int, attempts: int = 1,
             settings: dict | None = None) -> GateResult:
    """Diagnostics of draws ``{name: array (chain, draw, *shape)}`` with ArviZ."""
    import warnings  # noqa: PLC0415

    import numpy as np  # noqa: PLC0415

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)
        import arviz as az  # noqa: PLC0415

    params = []
    for name, arr in draws.items():
        a = np.asarray(arr, dtype=float)
        flat = a.reshape(a.shape[0], a.shape[1], -1)
        for k in range(flat.shape[2]):
            x = flat[:, :, k]
            label = name if flat.shape[2] == 1 else f"{name}[{k}]"
            with warnings.catch_warnings():  # constant draws: NaN, reported by reasons()
                warnings.simplefilter("ignore", RuntimeWarning)
                params.append(ParamDiagnostics(
                    label,
                    float(az.rhat(x, method="rank")),
                    float(az.ess(x, method="bulk")),
                    float(az.ess(x, method="tail")),
                ))
    return GateResult(params, int(divergences), attempts, dict(settings or {}))
