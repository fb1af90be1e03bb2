"""The life-stress figure of an at-use record (PNG, drawn from the record alone).

Across: the first stress on its relation's scale (1/T for Arrhenius, labelled in the
engineer's temperature unit; log stress for inverse power; stress for log-linear). Up: time,
log scale. Filled circles are exact failures, open squares interval failures at their
midpoint, open down-triangles left-censored failures at their inspection, open up-triangles
suspensions (the unit's life lies above). Black lines: posterior medians of the
characteristic life (Weibull 63.2% life, or the lognormal median) and of the B10 life; grey
bands their central credible bands; the dashed vertical line marks the use stress.
"""

from __future__ import annotations

import numpy as np

from qualbayes.evidence.life_plots import STYLE
from qualbayes.models.life_stress import KELVIN_OFFSET

MARKERS = {"failure": ("o", "black", "exact failure"),
           "interval": ("s", "none", "interval failure (midpoint)"),
           "left": ("v", "none", "left-censored failure"),
           "suspension": ("^", "none", "suspension (life above)")}
MAX_POINTS = 2000


def stress_points(data, max_points: int = MAX_POINTS) -> dict:
    """The units for the figure: first stress, a time per unit and its kind (thinned)."""
    f = data.life.frame
    kind = f["kind"].to_numpy()
    lo, hi = f["lower"].to_numpy(float), f["upper"].to_numpy(float)
    t = np.where(kind == "interval", np.sqrt(np.maximum(lo, 1e-300) * hi),
                 np.where(kind == "left", hi, lo))
    idx = np.arange(len(f))
    if idx.size > max_points:
        idx = np.unique(np.linspace(0, idx.size - 1, max_points).astype(int))
    return {"stress": data.stress[idx, 0].tolist(), "time": t[idx].tolist(),
            "kind": kind[idx].tolist()}


def _axis(relation: str):
    if relation == "arrhenius":
        return lambda x: 1.0 / np.asarray(x, float)
    if relation == "inverse-power":
        return lambda x: np.log(np.asarray(x, float))
    return lambda x: np.asarray(x, float)


def life_stress_figure(record: dict):
    """The life-stress figure of a converged at-use record, as a matplotlib Figure."""
    import matplotlib  # noqa: PLC0415

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt  # noqa: PLC0415

    r, q = record["result"], record["question"]
    s0 = record["stresses"][0]
    fx = _axis(s0["relation"])
    cv = r["curve"]
    xs = fx(cv["stress"])
    with plt.rc_context(STYLE):
        fig, ax = plt.subplots(figsize=(6.6, 4.8))
        for key, label in (("b63", "characteristic life" if q["distribution"] == "weibull"
                            else "median life"), ("b10", "B10 life")):
            band = cv[key]
            ax.fill_between(xs, band["low"], band["high"], color="#c8c8c8" if key == "b63"
                            else "#e3e3e3", linewidth=0, alpha=0.9)
            ax.plot(xs, band["median"], color="black", linewidth=1.4 if key == "b63" else 1.0,
                    linestyle="-" if key == "b63" else "--", label=f"{label} (median, band)")
        pts = record.get("points") or {"stress": [], "time": [], "kind": []}
        for kind, (marker, face, label) in MARKERS.items():
            sel = [i for i, k in enumerate(pts["kind"]) if k == kind]
            if sel:
                ax.scatter(fx([pts["stress"][i] for i in sel]), [pts["time"][i] for i in sel],
                           marker=marker, facecolors=face, edgecolors="black", s=18,
                           linewidths=0.8, zorder=3, label=label)
        use_x = float(fx([s0["use"]])[0])
        ax.axvline(use_x, color="#555555", linestyle=":", linewidth=1.0,
                   label=f"use {s0['use_as_written']}")
        b10 = r["b10_at_use"]
        ax.errorbar([use_x], [b10["median"]], yerr=[[b10["median"] - b10["interval"][0]],
                                                     [b10["interval"][1] - b10["median"]]],
                    fmt="D", color="black", markersize=5, capsize=3, zorder=4,
                    label="B10 at use")
        ax.set_yscale("log")
        _ticks(ax, s0, cv["stress"])
        u = q["units"]
        ax.set_ylabel(f"time{f' ({u})' if u else ''}, log scale")
        title = f"Life against {s0['column']} ({s0['relation']}); decision {r['decision']}"
        if len(record["stresses"]) > 1:
            title += "\nother stresses at their use values (points at their own test values)"
        ax.set_title(title, fontsize=9)
        ax.legend(loc="best", fontsize=7)
        fig.tight_layout()
    return fig


def _ticks(ax, s0: dict, grid) -> None:
    lo, hi = min(grid), max(grid)
    if s0["relation"] == "arrhenius":
        unit = s0["temperature_unit"] or "K"
        ticks = np.linspace(lo, hi, 6)
        ax.set_xticks(1.0 / ticks)
        ax.set_xticklabels([f"{(t - KELVIN_OFFSET if unit == 'C' else t):.0f}" for t in ticks])
        ax.set_xlabel(f"{s0['column']} (°{unit}, on a 1/T scale)" if unit == "C"
                      else f"{s0['column']} (K, on a 1/T scale)")
    elif s0["relation"] == "inverse-power":
        ticks = np.geomspace(lo, hi, 6)
        ax.set_xticks(np.log(ticks))
        ax.set_xticklabels([f"{t:.3g}" for t in ticks])
        ax.set_xlabel(f"{s0['column']} (log scale)")
    else:
        ax.set_xlabel(s0["column"])
