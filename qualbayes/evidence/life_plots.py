"""Figures of a life record: the Weibull probability plot and the R(t) curve (PNG).

Drawn from the record alone (so a saved record redraws the same figures), with matplotlib's
Agg backend, imported only here. Grey-scale readable: the posterior median is a solid black
line, the credible band a light grey fill, exact failures filled circles, interval
midpoints open squares, left-censored failures open triangles; the mission time and the
target are dashed.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

from qualbayes.evidence.files import write_atomic
from qualbayes.evidence.numbers import plural, probability, quantity

STYLE = {
    "font.size": 9, "axes.edgecolor": "#333333", "axes.linewidth": 0.8,
    "axes.grid": True, "grid.color": "#d9d9d9", "grid.linewidth": 0.6,
    "axes.spines.top": False, "axes.spines.right": False,
    "figure.dpi": 110, "savefig.dpi": 130, "legend.frameon": False,
}
MARKERS = {"exact": ("o", "black", "black"), "interval midpoint": ("s", "none", "black"),
           "left-censored": ("^", "none", "black")}
PROB_TICKS = (0.001, 0.01, 0.05, 0.1, 0.2, 0.3, 0.5, 0.632, 0.8, 0.9, 0.99, 0.999)


def safe_name(group: str) -> str:
    """A file-name fragment for a group label from the spreadsheet."""
    text = re.sub(r"[^A-Za-z0-9._-]+", "_", group).strip("._")
    return (text or "group")[:40]


def figure_names(record_groups: list[str]) -> list[tuple[str, str, str]]:
    """(group, probability-plot file, R(t) file) for each group, names made unique."""
    out, used = [], set()
    for g in record_groups:
        base = safe_name(g)
        name, k = base, 2
        while name in used:
            name, k = f"{base}_{k}", k + 1
        used.add(name)
        out.append((g, f"life_probability_{name}.png", f"life_reliability_{name}.png"))
    return out


def _plain_ticks(ax) -> None:
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter  # noqa: PLC0415

    ax.xaxis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
    ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: quantity(v)))
    ax.xaxis.set_minor_formatter(NullFormatter())


def _wy(p: float) -> float:
    return math.log(-math.log1p(-p))


def _pyplot():
    import matplotlib  # noqa: PLC0415

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt  # noqa: PLC0415

    return plt


def _save(fig, path: Path, force: bool) -> Path:
    plt = _pyplot()
    with plt.rc_context(STYLE):
        write_atomic(path, lambda tmp: fig.savefig(tmp, format="png"), force)
    plt.close(fig)
    return path


def draw_probability(group: dict, question: dict, path: Path, force: bool = False) -> Path:
    return _save(probability_figure(group, question), path, force)


def draw_reliability(group: dict, question: dict, path: Path, force: bool = False) -> Path:
    return _save(reliability_figure(group, question), path, force)


def probability_figure(group: dict, question: dict):
    """The Weibull probability plot of one group (a matplotlib Figure)."""
    plt = _pyplot()
    p = group["plot"]
    u = question["units"]
    cv = p["curve"]
    with plt.rc_context(STYLE):
        fig, ax = plt.subplots(figsize=(6.4, 4.8))
        t = cv["time"]

        def y_of(rel):
            return [_wy(min(max(1.0 - r, 1e-12), 1 - 1e-12)) for r in rel]

        ax.fill_between(t, y_of(cv["reliability_high"]), y_of(cv["reliability_low"]),
                        color="#c8c8c8", linewidth=0, label=p["band"])
        ax.plot(t, y_of(cv["reliability_median"]), color="black", linewidth=1.4,
                label="posterior median")
        pts = p["points"]
        for kind, (marker, face, edge) in MARKERS.items():
            xs = [x for x, k in zip(pts["time"], pts["kind"], strict=True) if k == kind]
            ys = [_wy(m) for m, k in zip(pts["median_rank"], pts["kind"], strict=True)
                  if k == kind]
            if xs:
                ax.scatter(xs, ys, marker=marker, facecolors=face, edgecolors=edge, s=18,
                           linewidths=0.8, zorder=3, label=f"failures ({kind})")
        ax.axvline(question["mission"], color="#555555", linestyle="--", linewidth=0.9,
                   label="mission time")
        ax.set_xscale("log")
        _plain_ticks(ax)
        ticks = list(PROB_TICKS)
        ax.set_yticks([_wy(q) for q in ticks])
        ax.set_yticklabels([f"{100 * q:g}%" for q in ticks])
        ymin = min(y_of(cv["reliability_median"])[0], _wy(0.001))
        ax.set_ylim(max(ymin, _wy(1e-4)), _wy(0.999))
        ax.set_xlabel(f"time{f' ({u})' if u else ''}")
        ax.set_ylabel("unreliability F(t), Weibull scale")
        ax.set_title(f"Weibull probability plot - {group['group']}\n"
                     f"median ranks (adjusted ranks, Bernard); {plural(p['units'], 'unit')}, "
                     f"{plural(group['failures'], 'failure')}", fontsize=9)
        ax.legend(loc="upper left", fontsize=8)
        fig.tight_layout()
    return fig


def reliability_figure(group: dict, question: dict):
    """R(t) of one group with its credible band, the mission and the target (a Figure)."""
    plt = _pyplot()
    p = group["plot"]
    u = question["units"]
    cv = p["curve"]
    with plt.rc_context(STYLE):
        fig, ax = plt.subplots(figsize=(6.4, 4.2))
        ax.fill_between(cv["time"], cv["reliability_low"], cv["reliability_high"],
                        color="#c8c8c8", linewidth=0, label=p["band"])
        ax.plot(cv["time"], cv["reliability_median"], color="black", linewidth=1.4,
                label="posterior median R(t)")
        ax.axvline(question["mission"], color="#555555", linestyle="--", linewidth=0.9,
                   label=f"mission {question['mission']:g}{f' {u}' if u else ''}")
        ax.axhline(question["target"], color="#555555", linestyle=":", linewidth=0.9,
                   label=f"target {question['target']:g}")
        rel = group["reliability_at_mission"]
        ax.plot([question["mission"]], [rel["lower_bound"]], marker="v", color="black",
                linestyle="none", label=f"{question['confidence']:.0%} lower bound "
                                        f"{probability(rel['lower_bound'])}")
        ax.set_xscale("log")
        _plain_ticks(ax)
        ax.set_ylim(0, 1.02)
        ax.set_xlabel(f"time{f' ({u})' if u else ''}")
        ax.set_ylabel("reliability R(t)")
        ax.set_title(f"Reliability - {group['group']}: decision {group['decision']}",
                     fontsize=9)
        ax.legend(loc="lower left", fontsize=8)
        fig.tight_layout()
    return fig


def group_figures(record: dict) -> list[tuple[str, str, object]]:
    """(group, kind, Figure) for both figures of every group that has an answer; kind is
    'probability' or 'reliability'."""
    out = []
    for group in record["groups"]:
        if group["plot"] is not None:
            out.append((group["group"], "probability",
                        probability_figure(group, record["question"])))
            out.append((group["group"], "reliability",
                        reliability_figure(group, record["question"])))
    return out


def draw_all(record: dict, folder: Path, force: bool = False) -> list[Path]:
    """Both figures of every group that has an answer."""
    written = []
    names = figure_names([g["group"] for g in record["groups"]])
    for group, (_, prob_name, rel_name) in zip(record["groups"], names, strict=True):
        if group["plot"] is None:
            continue
        written.append(draw_probability(group, record["question"], folder / prob_name, force))
        written.append(draw_reliability(group, record["question"], folder / rel_name, force))
    return written
