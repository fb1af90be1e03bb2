"""OC and assurance curves of a plan as PNG figures (matplotlib, Agg backend, imported only
here and only when a figure is drawn).

House style: black and greys only, one line style per series (readable printed in grey),
the goal as a dotted vertical line, a wanted level as a dashed horizontal line, plan points
as open markers (circle, square, triangle), light grid, no titles inside the plotting area.
"""

from __future__ import annotations

import io

_STYLES = [("-", "0.0"), ("--", "0.25"), ("-.", "0.45"), (":", "0.0"), ("-", "0.6"),
           ("--", "0.6")]
_MARKERS = ("o", "s", "^", "D")


def curve_png(curve: dict) -> bytes:
    """One curve record (see qualbayes.planning.records.curve) drawn as PNG bytes."""
    buf = io.BytesIO()
    curve_figure(curve).savefig(buf, format="png")
    return buf.getvalue()


def curve_figure(curve: dict):
    """One curve record drawn as a matplotlib Figure."""
    import matplotlib  # noqa: PLC0415

    matplotlib.use("Agg", force=True)
    from matplotlib.figure import Figure  # noqa: PLC0415

    fig = Figure(figsize=(6.4, 4.2), dpi=120)
    ax = fig.add_subplot()
    for k, s in enumerate(curve["series"]):
        ls, colour = _STYLES[k % len(_STYLES)]
        ax.plot(curve["x"], [float("nan") if v is None else v for v in s["y"]],
                linestyle=ls, color=colour, linewidth=1.6, label=s["label"])
    points = 0
    for m in curve["marks"]:
        if m["y"] is None:
            ax.axvline(m["x"], color="0.35", linestyle=":", linewidth=1.2, label=m["label"])
        elif m["x"] is None:
            ax.axhline(m["y"], color="0.35", linestyle="--", linewidth=1.0, label=m["label"])
        else:
            ax.plot([m["x"]], [m["y"]], marker=_MARKERS[points % len(_MARKERS)],
                    markersize=6, markerfacecolor="white", markeredgecolor="0.0",
                    linestyle="none", label=m["label"])
            points += 1
    if curve.get("x_log"):
        ax.set_xscale("log")
    ax.set_ylim(-0.02, 1.02)
    ax.set_xlabel(curve["x_label"])
    ax.set_ylabel(curve["y_label"])
    ax.grid(True, color="0.88", linewidth=0.6)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.legend(frameon=False, fontsize=8, loc="best")
    fig.suptitle(curve["title"], fontsize=11, x=0.02, ha="left")
    fig.text(0.02, 0.01, "qualbayes plan - decision support only", fontsize=7, color="0.4")
    fig.tight_layout(rect=(0, 0.03, 1, 0.97))
    return fig


def plan_figures(record: dict) -> dict[str, bytes]:
    """``{curve name: PNG bytes}`` for every curve of the record."""
    return {c["name"]: curve_png(c) for c in record["curves"]}
