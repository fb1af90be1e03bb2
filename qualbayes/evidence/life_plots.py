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


def figure_names(record_groups: list[str], fit_check: bool = False) -> list[tuple]:
    """(group, probability-plot file, R(t) file[, check-of-fit file]) for each group, names
    made unique."""
    out, used = [], set()
    for g in record_groups:
        base = safe_name(g)
        name, k = base, 2
        while name in used:
            name, k = f"{base}_{k}", k + 1
        used.add(name)
        files = (f"life_probability_{name}.png", f"life_reliability_{name}.png")
        out.append((g, *files, f"life_fit_check_{name}.png") if fit_check else (g, *files))
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


def fit_check_figure(group: dict, question: dict):
    """Observed failures per time bin (filled circles) against the posterior predictive
    median (short bar) and central range (vertical line) of each fitted distribution."""
    plt = _pyplot()
    checks = group["fit_check"]
    u = question["units"]
    edges = checks[0]["edges"]
    labels = []
    for lo, hi in zip(edges[:-1], edges[1:], strict=True):
        right = "end" if hi is None or hi == float("inf") else f"{hi:,.4g}"
        labels.append(f"{lo:,.4g} - {right}")
    shades = ("black", "#666666", "#999999")
    with plt.rc_context(STYLE):
        fig, ax = plt.subplots(figsize=(6.4, 4.2))
        width = 0.6 / len(checks)
        for j, c in enumerate(checks):
            xs = [k - 0.3 + width * (j + 0.5) for k in range(len(labels))]
            ax.vlines(xs, c["predicted_low"], c["predicted_high"], color=shades[j % 3],
                      linewidth=2.0, label=f"{c['family']}: {c['band']}, p = "
                                           f"{c['p_value']:.3f}")
            ax.scatter(xs, c["predicted_median"], marker="_", s=120, color=shades[j % 3])
        ax.scatter(range(len(labels)), checks[0]["observed"], marker="o", color="black",
                   zorder=3, s=30, label="observed failures")
        ax.set_xticks(range(len(labels)))
        ax.set_xticklabels(labels, rotation=20, fontsize=8)
        ax.set_xlabel(f"time bin{f' ({u})' if u else ''}")
        ax.set_ylabel("failures in the bin")
        ax.set_title(f"Check of fit - {group['group']}: observed against predicted "
                     "failures\n(units on test until their failure or suspension)",
                     fontsize=9)
        ax.legend(loc="upper right", fontsize=7)
        fig.tight_layout()
    return fig



def draw_fit_check(group: dict, question: dict, path: Path, force: bool = False) -> Path:
    return _save(fit_check_figure(group, question), path, force)


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
        if group.get("fit_check"):
            out.append((group["group"], "fit check",
                        fit_check_figure(group, record["question"])))
    return out


def draw_all(record: dict, folder: Path, force: bool = False) -> list[Path]:
    """Both figures of every group that has an answer, and its check-of-fit figure when the
    run made one."""
    written = []
    checked = any(g.get("fit_check") for g in record["groups"])
    names = figure_names([g["group"] for g in record["groups"]], checked)
    for group, (_, prob_name, rel_name, *more) in zip(record["groups"], names, strict=True):
        if group["plot"] is None:
            continue
        written.append(draw_probability(group, record["question"], folder / prob_name, force))
        written.append(draw_reliability(group, record["question"], folder / rel_name, force))
        if group.get("fit_check"):
            written.append(draw_fit_check(group, record["question"], folder / more[0], force))
    return written
