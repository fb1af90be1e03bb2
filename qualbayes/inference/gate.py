"""The convergence gate: no decision is reported from chains that fail it.

Thresholds follow Vehtari, Gelman, Simpson, Carpenter & Buerkner (2021), "Rank-normalization,
folding, and localization: an improved R-hat", Bayesian Analysis 16:667: rank-normalised
split R-hat <= 1.01 and bulk and tail ESS >= 400 (100 per chain for 4 chains), and no
divergent transitions. The older "R-hat < 1.1, ESS >= 100" rule is not used (see docs).

The gate judges the model's parameters (e.g. mu and log kappa of a part, log shape and log
scale of a group), never a derived quantity such as R(mission), which can saturate at 0 or 1
and then has no R-hat at all. Diagnostics come from one vectorised call per variable
(:mod:`qualbayes.inference.diagnostics`, numpy; no ArviZ import) and every parameter carries its
coordinates (``{"part": "X[1"}``), so selecting one part is an equality on coordinates,
never a match on the end of a label. A parameter whose draws never vary is reported as
constant (the sampler did not move): convergence is not shown and the gate fails.

>>> import numpy as np
>>> rng = np.random.default_rng(0)
>>> good, stuck = rng.normal(size=(4, 500)), np.ones((4, 500))
>>> gate = diagnose_arrays({"mu": np.stack([good, stuck], axis=-1)}, 0,
...                        dims={"mu": ["part"]}, coords={"part": ["1", "X[1"]})
>>> gate.select(part="1").passed, gate.select(part="X[1").passed
(True, False)
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

RHAT_MAX = 1.01
ESS_MIN = 400.0
DIVERGENCES_MAX = 0


@dataclass
class ParamDiagnostics:
    name: str
    rhat: float
    ess_bulk: float
    ess_tail: float
    constant: bool = False
    #: the coordinates of this element, e.g. {"part": "X[1"}; empty for a scalar variable
    coords: dict = field(default_factory=dict, compare=False)

    @property
    def passed(self) -> bool:  # NaN compares False: an undefined diagnostic never passes
        return self.rhat <= RHAT_MAX and self.ess_bulk >= ESS_MIN and self.ess_tail >= ESS_MIN

    def to_dict(self) -> dict:
        return {"name": self.name, "rhat": self.rhat, "ess_bulk": self.ess_bulk,
                "ess_tail": self.ess_tail, "constant": self.constant, "passed": self.passed}


@dataclass
class GateResult:
    params: list[ParamDiagnostics]
    divergences: int
    attempts: int = 1
    settings: dict = field(default_factory=dict)
    #: divergences of each element when every element had its own sampler, by dimension and
    #: label (``{"part": {"A": 0, "X[1": 3}}``): selecting an element keeps only its own
    local_divergences: dict = field(default_factory=dict)
    #: positions of the parameters by coordinate, built on the first :meth:`select` (a fit
    #: of 1,000 parts is selected part by part: a scan of every parameter each time would
    #: cost the square of the parts)
    _index: tuple | None = field(default=None, init=False, repr=False, compare=False)

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
            if p.constant:
                out.append(f"R-hat and ESS of {p.name} cannot be computed: it is constant "
                           "(every draw of every chain is the same, so the sampler did not "
                           "move); convergence is not shown")
                continue
            if not all(math.isfinite(v) for v in (p.rhat, p.ess_bulk, p.ess_tail)):
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

    def select(self, tag: str | None = None, **coords) -> GateResult:
        """The parameters of one element of a joint fit, by coordinate: ``select(part="A")``,
        or ``select("A")`` for the element whose (only) coordinate equals "A" (labelled
        ``name[A]``). Equality, never a suffix match: a part named "1" does not pick up the
        parameters of a part named "X[1". Divergences belong to the joint sampler and are
        kept whole, unless every element had its own sampler (``local_divergences``): then
        the element's own count."""
        by_value, by_coord = self._positions()
        picks = []
        if tag is not None:
            tag = str(tag)
            picks.append(by_value.get(tag, ()))
        picks += [by_coord.get((k, str(v)), ()) for k, v in coords.items()]
        if picks:
            keep = set(picks[0]).intersection(*picks[1:])
            chosen = [self.params[i] for i in sorted(keep)]
        else:
            chosen = self.params
        divergences, local = self.divergences, {}
        for dim, counts in self.local_divergences.items():
            label = str(coords[dim]) if dim in coords else tag
            if label is not None and label in counts:
                divergences, local = counts[label], {dim: {label: counts[label]}}
                break
        return GateResult(chosen, divergences, self.attempts, self.settings, local)

    def _positions(self) -> tuple[dict, dict]:
        """({str(value): positions}, {(dim, str(value)): positions}) of the parameters,
        rebuilt when the parameter list has changed since it was built."""
        key = (id(self.params), len(self.params))
        if self._index is None or self._index[0] != key:
            by_value: dict = {}
            by_coord: dict = {}
            for i, p in enumerate(self.params):
                for v in dict.fromkeys(str(v) for v in p.coords.values()):
                    by_value.setdefault(v, []).append(i)
                for k, v in p.coords.items():
                    by_coord.setdefault((k, str(v)), []).append(i)
            self._index = (key, by_value, by_coord)
        return self._index[1], self._index[2]

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
            "parameters": [p.to_dict() for p in self.params],
            "reasons": self.reasons(),
        }


def _worst(values: list[float], pick) -> float:
    """max/min that lets an undefined (NaN) diagnostic show instead of hiding it."""
    return float("nan") if any(math.isnan(v) for v in values) else pick(values)


def split_label(label: str) -> tuple[str, str | None]:
    """``"mu[X[1]"`` -> ("mu", "X[1"): the variable is everything before the first "[", the
    tag everything after it but the closing "]" (variable names never hold "[")."""
    if "[" in label and label.endswith("]"):
        var, rest = label.split("[", 1)
        return var, rest[:-1]
    return label, None


def diagnose_arrays(draws: dict, divergences: int, attempts: int = 1,
                    settings: dict | None = None, dims: dict | None = None,
                    coords: dict | None = None) -> GateResult:
    """Diagnostics of ``{variable: array (chain, draw, *shape)}``, one vectorised call per
    variable. ``dims[variable]`` names the trailing axes and ``coords[dim]`` their labels,
    so every element knows its coordinates (e.g. ``{"part": "A"}``)."""
    from qualbayes.inference import diagnostics  # noqa: PLC0415

    dims, coords = dims or {}, coords or {}
    params = []
    for name, arr in draws.items():
        a = np.asarray(arr, dtype=float)
        shape = a.shape[2:]
        names = list(dims.get(name, [f"{name}_dim_{i}" for i in range(len(shape))]))
        flat = a.reshape(a.shape[0], a.shape[1], -1)
        with np.errstate(all="ignore"):
            res = diagnostics.summary(flat)
        for k, index in enumerate(np.ndindex(*shape) if shape else [()]):
            where = {d: (coords[d][i] if d in coords else i) for d, i in zip(names, index,
                                                                            strict=True)}
            label = name if not where else f"{name}[{','.join(str(v) for v in where.values())}]"
            params.append(ParamDiagnostics(label, float(res["rhat"][k]),
                                           float(res["ess_bulk"][k]), float(res["ess_tail"][k]),
                                           bool(res["constant"][k]), where))
    return GateResult(params, int(divergences), attempts, dict(settings or {}))


def diagnose(draws: dict, divergences: int, attempts: int = 1,
             settings: dict | None = None) -> GateResult:
    """Diagnostics of draws ``{label: array (chain, draw, *shape)}`` (the older layout,
    kept for callers that label elements themselves, ``"mu[A]"``).

    Labels of the form ``var[tag]`` become the coordinate ``{"tag": tag}``; elements of one
    variable with equal shapes are stacked and judged in one vectorised call."""
    stacks: dict[str, list[tuple[str, str | None, np.ndarray]]] = {}
    for label, arr in draws.items():
        var, tag = split_label(label)
        stacks.setdefault(var if tag is not None else label, []).append(
            (label, tag, np.asarray(arr, dtype=float)))
    params: list[ParamDiagnostics] = []
    for var, items in stacks.items():
        tagged = [it for it in items if it[1] is not None and it[2].ndim == 2]
        if len(tagged) == len(items) and len({it[2].shape for it in items}) == 1:
            stacked = np.stack([it[2] for it in items], axis=-1)
            gate = diagnose_arrays({var: stacked}, 0, dims={var: ["tag"]},
                                   coords={"tag": [it[1] for it in items]})
            params += gate.params
            continue
        for label, tag, arr in items:
            gate = diagnose_arrays({label: arr}, 0)
            for p in gate.params:
                if tag is not None and arr.ndim == 2:
                    p.coords = {"tag": tag}
            params += gate.params
    return GateResult(params, int(divergences), attempts, dict(settings or {}))


def diagnose_idata(idata, var_names: list[str] | None = None, attempts: int = 1,
                   settings: dict | None = None) -> GateResult:
    """The gate on an ``arviz.InferenceData``: the posterior variables ``var_names`` (default:
    all), their dimensions and coordinates as stored, and the divergences counted from
    ``sample_stats.diverging``."""
    post = idata.posterior
    names = var_names or list(post.data_vars)
    draws, dims, coords = {}, {}, {}
    for name in names:
        da = post[name]
        draws[name] = da.values
        dims[name] = list(da.dims[2:])
        for d in dims[name]:
            coords[d] = [v.item() if hasattr(v, "item") else v for v in da.coords[d].values]
    divergences = 0
    if hasattr(idata, "sample_stats") and "diverging" in idata.sample_stats:
        divergences = int(np.asarray(idata.sample_stats["diverging"]).sum())
    return diagnose_arrays(draws, divergences, attempts, settings, dims, coords)
