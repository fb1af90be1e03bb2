"""Figures of the lots question, computed from the run record alone (so a saved record
rebuilds them identically)."""

from __future__ import annotations

import numpy as np
from scipy import special

from qualbayes.evidence.plots import HATCH, INK, LIGHT, MID, pyplot, rank_plot

MAX_PANELS = 30


def lot_beta_params(record: dict, lot: dict) -> tuple[np.ndarray, np.ndarray]:
    """Parameters of the Beta components of one lot's posterior (one component for the
    conjugate priors, one per posterior draw for the history prior)."""
    x, n = lot["defectives"], lot["inspected"]
    draws = record.get("posterior_draws")
    if draws:
        d = draws[lot.get("group") or lot["part"]]
        mu = np.asarray(d["mu"], float).ravel()
        kappa = np.asarray(d["kappa"], float).ravel()
        return mu * kappa + x, (1 - mu) * kappa + n - x
    a, b = record["prior_params"]["a"], record["prior_params"]["b"]
    return np.array([a + x]), np.array([b + n - x])


def _density(grid, alpha, beta):
    logpdf = ((alpha[:, None] - 1) * np.log(grid) + (beta[:, None] - 1) * np.log1p(-grid)
              - special.betaln(alpha, beta)[:, None])
    return np.exp(logpdf).mean(axis=0)


def _grid(record, lots):
    spec = record["question"]["spec"]
    hi = max([spec * 2.5] + [(lot["interval"][1] or spec) * 1.4 for lot in lots])
    return np.linspace(hi / 2000, min(hi, 0.999), 600)


def densities_figure(record: dict):
    """Posterior density of each lot's defect rate, the limit, and the mass beyond it."""
    plt = pyplot()
    lots = [lot for lot in record["lots"] if lot["prob_within_spec"] is not None]
    lots = sorted(lots, key=lambda r: r["prob_within_spec"])[:MAX_PANELS]
    spec = record["question"]["spec"]
    cols = 5
    rows = max(1, int(np.ceil(len(lots) / cols)))
    fig, axes = plt.subplots(rows, cols, figsize=(7.2, 1.35 * rows + 0.3), squeeze=False)
    for ax, lot in zip(axes.ravel(), lots, strict=False):
        grid = _grid(record, [lot])
        dens = _density(grid, *lot_beta_params(record, lot))
        ax.plot(grid * 100, dens, color=INK)
        beyond = grid >= spec
        ax.fill_between(grid[beyond] * 100, dens[beyond], color="white", edgecolor=MID,
                        hatch=HATCH, linewidth=0)
        ax.axvline(spec * 100, color=INK, linestyle="--", linewidth=0.9)
        ax.set_title(f"{lot['lot']}: {lot['decision']}\nP(p > spec) = "
                     f"{1 - lot['prob_within_spec']:.3f}", fontsize=6.5)
        ax.set_yticks([])
        ax.tick_params(labelsize=6)
    for ax in axes.ravel()[len(lots):]:
        ax.axis("off")
    fig.supxlabel("defect rate p (%) - dashed line: the limit; hatched: mass beyond it",
                  fontsize=7)
    fig.tight_layout()
    return fig


def intervals_figure(record: dict):
    """Lot-by-lot credible intervals in date order (file order when there are no dates);
    with the history prior each lot also shows its interval on its own data alone (uniform
    prior), so the pooling is visible."""
    plt = pyplot()
    lots = [lot for lot in record["lots"] if lot["interval"][0] is not None]
    lots = sorted(enumerate(lots), key=lambda t: (t[1]["date"] or "", t[0]))
    lots = [lot for _, lot in lots]
    c = record["question"]["confidence"]
    pooled = bool(record.get("posterior_draws"))
    fig, ax = plt.subplots(figsize=(7.2, 3.2))
    xs = np.arange(len(lots))
    for i, lot in enumerate(lots):
        lo, hi = lot["interval"]
        ax.plot([i, i], [lo * 100, hi * 100], color=INK, linewidth=1.6, linestyle="-")
        ax.plot(i, lot["posterior_mean"] * 100, marker="o", color=INK, markersize=3)
        if pooled:
            x, n = lot["defectives"], lot["inspected"]
            t = (1 - c) / 2
            alone = special.betaincinv(1 + x, 1 + n - x, [t, 1 - t])
            ax.plot([i + 0.3, i + 0.3], alone * 100, color=LIGHT, linewidth=1.6,
                    linestyle="-")
    ax.axhline(record["question"]["spec"] * 100, color=INK, linestyle="--", linewidth=0.9,
               label="limit")
    ax.plot([], [], color=INK, linewidth=1.6,
            label=f"{c:.0%} interval" + (" (pooled, history prior)" if pooled else ""))
    if pooled:
        ax.plot([], [], color=LIGHT, linewidth=1.6, label="the lot alone (uniform prior)")
    ax.set_xticks(xs)
    ax.set_xticklabels([lot["lot"] for lot in lots], rotation=90, fontsize=5.5)
    ax.set_ylabel("defect rate (%)")
    ax.set_ylim(bottom=0)
    ax.legend(loc="upper left")
    fig.tight_layout()
    return fig


def prior_posterior_figure(record: dict):
    """Prior against posterior: the mean rate mu of each part (history prior) with the next
    lot's predictive, or the Beta prior against every lot's posterior (conjugate)."""
    plt = pyplot()
    fig, ax = plt.subplots(figsize=(7.2, 2.8))
    spec = record["question"]["spec"]
    draws = record.get("posterior_draws")
    if draws:
        hi = spec * 4
        grid = np.linspace(hi / 2000, hi, 600)
        styles = ["-", "--", ":", "-."]
        top = 0.0
        for k, (part, d) in enumerate(draws.items()):
            mu = np.asarray(d["mu"], float).ravel()
            kappa = np.asarray(d["kappa"], float).ravel()
            hist, edges = np.histogram(mu, bins=60, range=(0, hi), density=True)
            ax.step(edges[:-1] * 100, hist, where="post", color=INK,
                    linestyle=styles[k % 4], label=f"{part}: posterior of mean rate mu")
            top = max(top, float(hist.max()))
            pred = _density(grid, mu * kappa, (1 - mu) * kappa)
            ax.plot(grid * 100, pred, color=MID, linestyle=styles[k % 4], linewidth=0.8,
                    label=f"{part}: next lot's rate (predictive)")
        ax.axhline(1.0, color=LIGHT, label="prior of mu: uniform on (0, 1)")
        ax.set_ylim(0, 1.3 * top)  # a predictive with shape < 1 is unbounded at 0
    else:
        a, b = record["prior_params"]["a"], record["prior_params"]["b"]
        lots = record["lots"]
        grid = _grid(record, lots)
        ax.plot(grid * 100, _density(grid, np.array([a]), np.array([b])), color=MID,
                linestyle="--", label=f"prior Beta({a:g}, {b:g})")
        for k, lot in enumerate(lots):
            ax.plot(grid * 100, _density(grid, *lot_beta_params(record, lot)), color=LIGHT,
                    linewidth=0.6, label="posterior of each lot" if k == 0 else None)
    ax.axvline(spec * 100, color=INK, linestyle="--", linewidth=0.9, label="limit")
    ax.set_xlabel("defect rate (%)")
    ax.set_yticks([])
    ax.legend(loc="upper right", fontsize=6)
    fig.tight_layout()
    return fig


def rank_figures(record: dict) -> list:
    draws = record.get("posterior_draws") or {}
    out = []
    for part, d in draws.items():
        out.append((part, rank_plot({
            "mu": np.asarray(d["mu"], float),
            "log kappa": np.log(np.asarray(d["kappa"], float))}, f"rank plots: {part}")))
    return out
