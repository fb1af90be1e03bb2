"""Figures shared by every report: one style, grey-scale readable, matplotlib (Agg).

Each function takes plain arrays or a run record and returns a matplotlib Figure.
"""

from __future__ import annotations

import numpy as np

INK, MID, LIGHT = "#000000", "#555555", "#b0b0b0"
HATCH = "////"
STYLE = {
    "font.family": "DejaVu Sans", "font.size": 8, "axes.titlesize": 8.5,
    "axes.labelsize": 8, "axes.spines.top": False, "axes.spines.right": False,
    "axes.edgecolor": INK, "axes.linewidth": 0.7, "xtick.labelsize": 7,
    "ytick.labelsize": 7, "legend.fontsize": 7, "legend.frameon": False,
    "lines.linewidth": 1.2, "axes.prop_cycle": None, "figure.dpi": 110,
    "savefig.bbox": "tight", "hatch.linewidth": 0.6,
}


def pyplot():
    """matplotlib.pyplot on the Agg backend with our style applied."""
    import matplotlib  # noqa: PLC0415

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt  # noqa: PLC0415
    from cycler import cycler  # noqa: PLC0415

    style = dict(STYLE)
    style["axes.prop_cycle"] = cycler(color=[INK, MID, LIGHT])
    plt.rcParams.update(style)
    return plt


def rank_plot(chains_by_param: dict[str, np.ndarray], title: str, bins: int = 20):
    """Rank plots: for each parameter, the histogram of the ranks of each chain's draws among
    all draws (flat when the chains mix; Vehtari et al. 2021)."""
    plt = pyplot()
    names = list(chains_by_param)
    cols = 2
    rows = int(np.ceil(len(names) / cols))
    fig, axes = plt.subplots(rows, cols, figsize=(7.0, 1.7 * rows + 0.4), squeeze=False)
    styles = ["-", "--", ":", "-."]
    for ax, name in zip(axes.ravel(), names, strict=False):
        draws = np.asarray(chains_by_param[name])
        ranks = np.argsort(np.argsort(draws.ravel())).reshape(draws.shape)
        edges = np.linspace(0, ranks.size, bins + 1)
        for c in range(draws.shape[0]):
            counts, _ = np.histogram(ranks[c], bins=edges)
            ax.step(edges[:-1], counts, where="post", color=INK if c % 2 == 0 else MID,
                    linestyle=styles[c % 4], label=f"chain {c + 1}")
        ax.axhline(draws.shape[1] / bins, color=LIGHT, linewidth=0.8)
        ax.set_title(name)
        ax.set_yticks([])
        ax.set_xlabel("rank among all draws")
    for ax in axes.ravel()[len(names):]:
        ax.axis("off")
    fig.suptitle(title, fontsize=9)
    outside_legend(fig, axes.ravel()[0].get_legend_handles_labels(), ncol=4)
    return fig


def outside_legend(fig, handles_labels: tuple[list, list], ncol: int | None = None):
    """Lay the figure out with a band at the bottom for the legend, so that the legend
    covers no curve, label or title; returns the legend (None when nothing is labelled)."""
    handles, labels = handles_labels
    if not handles:
        fig.tight_layout()
        return None
    ncol = ncol or min(len(labels), 2)
    rows = -(-len(labels) // ncol)
    band = (0.16 * rows + 0.12) / fig.get_size_inches()[1]
    fig.tight_layout(rect=(0, band, 1, 1))
    return fig.legend(handles, labels, loc="lower center", ncol=ncol,
                      bbox_to_anchor=(0.5, 0.0), frameon=False)
