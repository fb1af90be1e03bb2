"""Figures of the lots question, computed from the run record alone (so a saved record
rebuilds them identically)."""

from __future__ import annotations

import numpy as np
from scipy import special

from qualbayes.evidence.numbers import is_probability, plural
from qualbayes.evidence.plots import HATCH, INK, LIGHT, MID, outside_legend, pyplot, rank_plot

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
    """Posterior density of each lot's defect rate, the limit, and the mass beyond it
    hatched (a hatched patch from the limit to the end of the grid, under the curve)."""
    plt = pyplot()
    lots = [lot for lot in record["lots"] if lot["prob_within_spec"] is not None]
    lots = sorted(lots, key=lambda r: r["prob_within_spec"])[:MAX_PANELS]
    spec = record["question"]["spec"]
    cols = 5
    rows = max(1, int(np.ceil(len(lots) / cols)))
    fig, axes = plt.subplots(rows, cols, figsize=(7.2, 1.35 * rows + 0.3), squeeze=False)
    for ax, lot in zip(axes.ravel(), lots, strict=False):
        grid = np.union1d(_grid(record, [lot]), [spec])
        dens = _density(grid, *lot_beta_params(record, lot))
        ax.plot(grid * 100, dens, color=INK)
        beyond = grid >= spec
        if beyond.sum() >= 2:
            ax.fill_between(grid[beyond] * 100, dens[beyond], facecolor="none",
                            edgecolor=MID, hatch=HATCH, linewidth=0.6,
                            label="mass beyond the limit")
        ax.axvline(spec * 100, color=INK, linestyle="--", linewidth=0.9)
        ax.set_ylim(bottom=0)
        ax.set_title(f"{lot['lot']}: {lot['decision']}\nP(p > spec) "
                     f"{is_probability(1 - lot['prob_within_spec'])}", fontsize=6.5)
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
    ax.set_xlabel("lots in date order" if any(lot["date"] for lot in lots)
                  else "lots in the order of the file (no dates)")
    ax.set_ylim(bottom=0)
    outside_legend(fig, ax.get_legend_handles_labels())
    return fig


def _log_density(grid: np.ndarray, alpha: np.ndarray, beta: np.ndarray) -> np.ndarray:
    """Density of ln p (p f(p)), the height whose area reads right on a log axis."""
    return grid * _density(grid, alpha, beta)


def _whole_grid(alpha, beta, n: int = 500) -> np.ndarray:
    """A log-spaced grid over the central 99.8% of a Beta mixture (so the curve is whole)."""
    lo = float(np.min(special.betaincinv(alpha, beta, 0.001)))
    hi = float(np.max(special.betaincinv(alpha, beta, 0.999)))
    lo = max(lo, 1e-12)
    return np.geomspace(lo, max(hi, lo * 10), n)


def prior_posterior_figure(record: dict):
    """Prior against posterior on a log rate axis, each curve over its own central 99.8%,
    drawn as the density of ln p so every curve is whole and comparable: one panel per part
    with the history prior (mean rate mu and the next lot's predictive), or the Beta prior
    against the posterior of each distinct lot result (conjugate priors)."""
    plt = pyplot()
    spec = record["question"]["spec"]
    draws = record.get("posterior_draws")
    panels = list(draws.items()) if draws else [(None, None)]
    fig, axes = plt.subplots(len(panels), 1, figsize=(7.2, 1.9 * len(panels) + 0.6),
                             squeeze=False)
    handles: dict = {}
    for ax, (part, d) in zip(axes.ravel(), panels, strict=True):
        if d is not None:
            _history_panel(ax, d)
            ax.set_title(f"part {part}")
        else:
            _conjugate_panel(ax, record)
        ax.axvline(spec * 100, color=INK, linestyle=(0, (6, 2, 1, 2)), linewidth=0.9,
                   label="limit")
        ax.set_xscale("log")
        ax.set_xlabel("defect rate (%), log scale")
        ax.set_ylabel("density of log p")
        ax.set_yticks([])
        ax.set_ylim(bottom=0)
        for h, lab in zip(*ax.get_legend_handles_labels(), strict=True):
            handles.setdefault(lab, h)
    outside_legend(fig, (list(handles.values()), list(handles)))
    return fig


def _history_panel(ax, d) -> None:
    mu = np.asarray(d["mu"], float).ravel()
    kappa = np.asarray(d["kappa"], float).ravel()
    log_mu = np.log(mu)
    edges = np.linspace(log_mu.min(), log_mu.max(), 41)
    hist, _ = np.histogram(log_mu, bins=edges, density=True)
    ax.stairs(hist, np.exp(edges) * 100, color=INK, linewidth=1.3,
              label="posterior of the mean rate mu")
    # the next lot's rate: one draw per posterior draw, as a histogram of ln p over its
    # central 99% (a density curve would be unbounded where the Beta shapes fall below 1)
    pred = np.random.default_rng(0).beta(mu * kappa, (1 - mu) * kappa)
    pred = pred[pred > 0]
    lo, hi = np.quantile(pred, [0.005, 0.995])
    grid = np.geomspace(max(min(lo, mu.min()), 1e-12), max(hi, mu.max()), 500)
    edges = np.linspace(np.log(lo), np.log(hi), 41)
    counts, _ = np.histogram(np.log(pred), bins=edges)
    ax.stairs(counts / (pred.size * np.diff(edges)), np.exp(edges) * 100, color=MID,
              linestyle="--", linewidth=1.1, label="next lot's rate (predictive)")
    prior = np.geomspace(grid[0], 1.0, 200)
    ax.plot(prior * 100, prior, color=LIGHT, linestyle=":", linewidth=1.4,
            label="prior of mu: uniform on (0, 1)")
    ax.set_xlim(grid[0] * 100, 100)


_STYLES = [("-", INK), ("--", INK), (":", INK), ("-.", INK), ("-", MID), ("--", MID),
           (":", MID), ("-.", MID)]
MAX_CURVES = len(_STYLES)


def _conjugate_panel(ax, record: dict) -> None:
    a, b = record["prior_params"]["a"], record["prior_params"]["b"]
    groups: dict = {}
    for lot in record["lots"]:
        if lot["prob_within_spec"] is not None:
            groups.setdefault((lot["defectives"], lot["inspected"]), []).append(lot)
    ordered = sorted(groups.items(), key=lambda kv: kv[1][0]["prob_within_spec"])
    shown = ordered[:MAX_CURVES]
    curves = [(np.array([a]), np.array([b]))] + [lot_beta_params(record, lots[0])
                                                 for _, lots in shown]
    lo = min(_whole_grid(*c)[0] for c in curves)
    hi = max(_whole_grid(*c)[-1] for c in curves)
    ax.plot(*_curve(np.array([a]), np.array([b])), color=LIGHT, linewidth=2.2,
            label=f"prior Beta({a:g}, {b:g})")
    for k, ((x, n), lots) in enumerate(shown):
        ls, colour = _STYLES[k]
        names = ", ".join(lot["lot"] for lot in lots[:3]) + (", ..." if len(lots) > 3 else "")
        ax.plot(*_curve(*lot_beta_params(record, lots[0])), color=colour, linestyle=ls,
                linewidth=1.1, label=f"{plural(x, 'defective')} in {n:,}: {names}")
    ax.set_xlim(lo * 100, hi * 100)
    if len(ordered) > MAX_CURVES:
        ax.set_title(f"prior and the posteriors of the {MAX_CURVES} lot results with the "
                     f"least evidence of meeting the limit (of {len(ordered)} distinct results)")
    else:
        ax.set_title("prior and the posterior of each distinct lot result")


def _curve(alpha, beta):
    grid = _whole_grid(alpha, beta)
    return grid * 100, _log_density(grid, alpha, beta)


def rank_figures(record: dict) -> list:
    draws = record.get("posterior_draws") or {}
    out = []
    for part, d in draws.items():
        out.append((part, rank_plot({
            "mu": np.asarray(d["mu"], float),
            "log kappa": np.log(np.asarray(d["kappa"], float))}, f"rank plots: {part}")))
    return out
