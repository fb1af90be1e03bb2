"""The scorecard chart: each supplier's defect rate per period (median and central interval),
against the limit, computed from the run record alone."""

from __future__ import annotations

import numpy as np

from qualbayes.evidence.numbers import rate
from qualbayes.evidence.plots import INK, LIGHT, MID, pyplot

MAX_PANELS = 12  # the worst suppliers first; the workbook holds every supplier
SCALE = {"%": 100.0, "ppm": 1e6}  # rates drawn in the unit the limit was written in


def rates_figure(record: dict):
    """A panel per supplier (worst first, at most 12) with the rate of each period, or one
    panel of all suppliers when there are no periods. Returns a matplotlib Figure."""
    plt = pyplot()
    q = record["question"]
    spec, c = q["spec"], q["confidence"]
    unit = q.get("rate_unit") or "%"
    k = SCALE.get(unit, 100.0)
    ranked = [s["supplier"] for s in record["suppliers"]]
    cells = record["periods"]
    if not q["period"]:
        return _one_panel(plt, ranked, cells, spec, c, unit)
    shown = ranked[:MAX_PANELS]
    cols = min(3, len(shown))
    rows = int(np.ceil(len(shown) / cols))
    fig, axes = plt.subplots(rows, cols, figsize=(7.0, 1.9 * rows + 0.5), squeeze=False,
                             sharey=True)
    labels = sorted({cell["period"] for cell in cells})
    for ax, name in zip(axes.ravel(), shown, strict=False):
        mine = [cell for cell in cells if cell["supplier"] == name]
        x = np.array([labels.index(cell["period"]) for cell in mine])
        _points(ax, x, mine, k)
        ax.axhline(k * spec, color=MID, linestyle="--", linewidth=0.8)
        ax.set_title(name)
        ax.set_xticks(range(len(labels)))
        ax.set_xticklabels(labels, rotation=60, ha="right")
    for ax in axes[:, 0]:
        ax.set_ylabel(f"defect rate, {unit}")
    for ax in axes.ravel()[len(shown):]:
        ax.axis("off")
    more = f"; {len(ranked) - len(shown)} more in the workbook" if len(ranked) > len(shown) \
        else ""
    fig.suptitle(f"Defect rate per {q['period']}: median and central {c:.0%} interval; "
                 f"dashed: limit {rate(spec, unit)}{more}", y=1.0, fontsize=9)
    fig.tight_layout()
    return fig


def _points(ax, x, cells, k: float) -> None:
    if any(cell["rate_median"] is None for cell in cells):  # failed gate: counts only
        observed = [k * cell["defectives"] / cell["inspected"] for cell in cells]
        ax.plot(x, observed, "x", color=LIGHT, label="observed x/n (no posterior: gate failed)")
        return
    med = np.array([k * cell["rate_median"] for cell in cells])
    low = np.array([k * cell["interval_low"] for cell in cells])
    high = np.array([k * cell["interval_high"] for cell in cells])
    ax.errorbar(x, med, yerr=[med - low, high - med], fmt="o", color=INK, markersize=3,
                capsize=2, linewidth=0.9)


def _one_panel(plt, ranked, cells, spec, c, unit):
    k = SCALE.get(unit, 100.0)
    shown = ranked[:40]
    fig, ax = plt.subplots(figsize=(6.0, 0.22 * len(shown) + 1.0))
    by_name = {cell["supplier"]: cell for cell in cells}
    chosen = [by_name[name] for name in shown][::-1]
    y = np.arange(len(chosen))
    if any(cell["rate_median"] is None for cell in chosen):
        ax.plot([k * cell["defectives"] / cell["inspected"] for cell in chosen], y, "x",
                color=LIGHT, label="observed x/n (no posterior: gate failed)")
    else:
        med = np.array([k * cell["rate_median"] for cell in chosen])
        low = np.array([k * cell["interval_low"] for cell in chosen])
        high = np.array([k * cell["interval_high"] for cell in chosen])
        ax.errorbar(med, y, xerr=[med - low, high - med], fmt="o", color=INK, markersize=3,
                    capsize=2, linewidth=0.9)
    ax.axvline(k * spec, color=MID, linestyle="--", linewidth=0.8)
    ax.set_yticks(y)
    ax.set_yticklabels([cell["supplier"] for cell in chosen])
    ax.set_xlabel(f"defect rate, {unit}")
    ax.set_title(f"Defect rate per supplier: median and central {c:.0%} interval; dashed: "
                 f"limit {rate(spec, unit)}")
    fig.tight_layout()
    return fig


def figure_writer(record: dict):
    """The function that saves the chart as PNG at the path it is given."""

    def write(path) -> None:
        fig = rates_figure(record)
        try:
            fig.savefig(path, format="png")
        finally:
            pyplot().close(fig)

    return write
