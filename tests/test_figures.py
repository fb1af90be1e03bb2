"""Figures show what their captions claim: checked on the artists and on the pixels."""

import numpy as np
import pytest
from matplotlib.collections import PolyCollection
from matplotlib.figure import Figure
from matplotlib.patches import StepPatch

from qualbayes.evidence import lot_plots
from qualbayes.evidence.life_plots import probability_figure, reliability_figure
from qualbayes.evidence.plan_plots import curve_figure
from qualbayes.evidence.plots import HATCH, rank_plot
from qualbayes.evidence.prior_plots import prior_figure

SPEC = 0.02


def _lot(name, x, n, prob, date=None):
    return {"lot": name, "part": "P-1", "date": date, "inspected": n, "defectives": x,
            "posterior_mean": (1 + x) / (2 + n), "interval": [0.001, 0.06],
            "upper_bound": 0.05, "prob_within_spec": prob, "decision": "undecided"}


def conjugate_record(dates=False):
    lots = [_lot(f"L{k}", x, n, p, f"2026-07-0{k + 1}" if dates else None)
            for k, (x, n, p) in enumerate([(3, 80, 0.21), (0, 125, 0.92), (1, 50, 0.56),
                                           (5, 200, 0.31), (0, 315, 0.998)])]
    return {"kind": "lots", "question": {"spec": SPEC, "confidence": 0.95},
            "prior_params": {"a": 1.0, "b": 1.0}, "posterior_draws": {}, "lots": lots}


def history_record():
    rng = np.random.default_rng(1)
    draws = {}
    for part, m in (("P-1", 0.004), ("P-2", 0.03)):
        mu = rng.beta(40 * m / (1 - m) + 1, 40, size=(4, 250))
        draws[part] = {"mu": mu.tolist(), "kappa": rng.gamma(20, 10, size=(4, 250)).tolist()}
    lots = [dict(_lot("A", 1, 125, 0.7), part="P-1"), dict(_lot("B", 4, 80, 0.1), part="P-2")]
    return {"kind": "lots", "question": {"spec": SPEC, "confidence": 0.95},
            "posterior_draws": draws, "lots": lots}


def _pixels(fig) -> np.ndarray:
    fig.canvas.draw()
    return np.asarray(fig.canvas.buffer_rgba())[..., :3].astype(int)


def _window(img, fig, ax, x, y, half=7) -> np.ndarray:
    """The pixels around data point (x, y) of ``ax`` (image rows run top-down)."""
    px, py = ax.transData.transform((x, y))
    row = img.shape[0] - int(round(py))
    col = int(round(px))
    return img[row - half:row + half, col - half:col + half]


def test_density_figure_hatches_the_mass_beyond_the_limit_and_only_there():
    record = conjugate_record()
    fig = lot_plots.densities_figure(record)
    assert isinstance(fig, Figure)
    fig.set_dpi(220)  # panels large enough to put a window well inside a region
    img = _pixels(fig)
    beyond_checked = before_checked = 0
    for ax in fig.axes:
        if not ax.lines:
            continue
        hatched = [c for c in ax.collections
                   if isinstance(c, PolyCollection) and c.get_hatch() == HATCH]
        assert len(hatched) == 1, "each panel has one hatched region"
        xs = np.concatenate([p.vertices[:, 0] for p in hatched[0].get_paths()])
        assert xs.min() >= SPEC * 100 - 1e-9  # the hatch starts at the limit
        grid, dens = (np.asarray(v) for v in ax.lines[0].get_data())
        # the highest point beyond the limit, halfway up: hatch lines show there
        k = int(np.argmax(np.where(grid > SPEC * 100 * 1.1, dens, -1)))
        if dens[k] >= 0.3 * dens.max():
            dark = (_window(img, fig, ax, grid[k], dens[k] / 2).sum(axis=2) < 500).mean()
            assert 0.03 < dark < 0.7, f"no visible hatch beyond the limit ({dark:.3f})"
            beyond_checked += 1
        # the highest point before the limit, halfway up: plain white
        j = int(np.argmax(np.where(grid < SPEC * 100 * 0.8, dens, -1)))
        if dens[j] >= 0.3 * dens.max():
            win = _window(img, fig, ax, grid[j], dens[j] / 2, half=4)
            assert (win.sum(axis=2) < 500).mean() == 0, "hatching before the limit"
            before_checked += 1
    assert beyond_checked >= 3 and before_checked >= 2


def _bbox(artist, fig):
    return artist.get_window_extent(fig.canvas.get_renderer())


def _legend_covers_nothing(fig):
    fig.canvas.draw()
    legends = fig.legends + [ax.get_legend() for ax in fig.axes if ax.get_legend()]
    assert legends
    for leg in legends:
        box = _bbox(leg, fig)
        for ax in fig.axes:
            if not ax.get_visible() or not ax.axison:
                continue
            assert not box.overlaps(_bbox(ax, fig)), "legend over a panel"
            assert not box.overlaps(_bbox(ax.title, fig)) or not ax.get_title()
        if fig._suptitle is not None:
            assert not box.overlaps(_bbox(fig._suptitle, fig)), "legend over the title"


def _curves(ax):
    return [ln for ln in ax.lines if len(ln.get_xdata()) > 2]


@pytest.mark.parametrize("make", [conjugate_record, history_record])
def test_prior_posterior_curves_are_whole_distinct_and_uncovered(make):
    fig = lot_plots.prior_posterior_figure(make())
    assert isinstance(fig, Figure)
    for ax in fig.axes:
        assert ax.get_xscale() == "log"
        lo, hi = ax.get_xlim()
        top = ax.get_ylim()[1]
        curves = _curves(ax)
        steps = [p for p in ax.patches if isinstance(p, StepPatch)]
        assert len(curves) + len(steps) >= 3  # prior and at least two posteriors
        for ln in curves:
            x, y = (np.asarray(v, float) for v in ln.get_data())
            assert x.min() >= lo * (1 - 1e-9) and x.max() <= hi * (1 + 1e-9), ln.get_label()
            assert np.nanmax(y) <= top, f"{ln.get_label()} cut at the top"
            # whole: the curve falls to a small part of its peak at both ends of its range
            assert y[0] < 0.2 * np.nanmax(y) or ln.get_label().startswith("prior")
        styles = [(str(a.get_linestyle()), str(a.get_edgecolor() if isinstance(a, StepPatch)
                                                 else a.get_color()), a.get_linewidth())
                  for a in [*curves, *steps]]
        assert len(set(styles)) == len(styles), "two curves drawn alike"
        for patch in steps:  # histograms (of ln p) whole and under the top too
            edges = patch.get_data().edges
            assert edges[0] >= lo * (1 - 1e-9) and edges[-1] <= hi * (1 + 1e-9)
            assert patch.get_data().values.max() <= top
    _legend_covers_nothing(fig)


def test_rank_plot_legend_covers_no_panel_or_title():
    rng = np.random.default_rng(2)
    fig = rank_plot({"mu": rng.normal(size=(4, 200)), "log kappa": rng.normal(size=(4, 200))},
                    "rank plots: P-1")
    assert isinstance(fig, Figure)
    _legend_covers_nothing(fig)


def test_interval_chart_claims_date_order_only_with_dates():
    no_dates = lot_plots.intervals_figure(conjugate_record(dates=False))
    assert "date" not in no_dates.axes[0].get_xlabel().replace("no dates", "")
    assert "order of the file" in no_dates.axes[0].get_xlabel()
    dated = lot_plots.intervals_figure(conjugate_record(dates=True))
    assert dated.axes[0].get_xlabel() == "lots in date order"
    _legend_covers_nothing(dated)


def _life_group(failures):
    t = [100.0, 1000.0, 10000.0]
    return {"group": "Rev C", "failures": failures, "decision": "meets",
            "reliability_at_mission": {"lower_bound": 0.91},
            "plot": {"band": "90% band", "units": 1,
                     "curve": {"time": t, "reliability_low": [0.99, 0.9, 0.2],
                               "reliability_median": [0.995, 0.95, 0.4],
                               "reliability_high": [0.999, 0.98, 0.6]},
                     "points": {"time": [800.0] * failures,
                                "median_rank": [0.5] * failures,
                                "kind": ["exact"] * failures}}}


def test_life_figures_are_figures_with_right_plurals():
    q = {"units": "h", "mission": 1000.0, "target": 0.9, "confidence": 0.9}
    one = probability_figure(_life_group(1), q)
    assert isinstance(one, Figure)
    title = one.axes[0].get_title()
    assert "1 failure" in title and "1 failures" not in title and "1 unit," in title
    assert "3 failures" in probability_figure(_life_group(3), q).axes[0].get_title()
    assert isinstance(reliability_figure(_life_group(1), q), Figure)


def test_plan_curve_and_prior_figures_are_figures_and_sheets_are_named_in_words():
    from qualbayes.evidence.plan_record import curve_sheet_name

    fig = curve_figure({"title": "OC", "x_label": "p", "y_label": "P(accept)",
                        "x": [0.0, 0.5, 1.0], "series": [{"label": "plan", "y": [1, .5, 0]}],
                        "marks": []})
    assert isinstance(fig, Figure)
    assert curve_sheet_name("oc") == "OC curve"
    assert curve_sheet_name("assurance") == "Assurance curve"
    assert isinstance(prior_figure({"prior_params": {"a": 2.0, "b": 50.0}}), Figure)
