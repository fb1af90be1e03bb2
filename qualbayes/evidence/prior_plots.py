"""The prior figure: each elicited prior's density with the stated values marked, and the
priors of the sensitivity set side by side (matplotlib via qualbayes.evidence.plots)."""

from __future__ import annotations

import io
import math

import numpy as np
from scipy import special

from qualbayes.evidence.plots import INK, LIGHT, MID, pyplot

_STYLES = ["-", "--", ":", "-.", (0, (5, 1)), (0, (1, 2)), (0, (3, 1, 1, 1)), (0, (8, 2))]


def density(family: str, params: dict, x: np.ndarray) -> np.ndarray:
    """Density of a Beta {a, b}, gamma {a, rate} or lognormal {mu, sigma} prior."""
    x = np.asarray(x, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        if family == "beta":
            a, b = params["a"], params["b"]
            log = special.xlogy(a - 1, x) + special.xlog1py(b - 1, -x) - special.betaln(a, b)
        elif family == "gamma":
            a, r = params["a"], params["rate"]
            log = a * math.log(r) + special.xlogy(a - 1, x) - r * x - special.gammaln(a)
        else:
            z = (np.log(x) - params["mu"]) / params["sigma"]
            log = -0.5 * z * z - np.log(x * params["sigma"] * math.sqrt(2 * math.pi))
    return np.exp(log)


def quantile(family: str, params: dict, q) -> np.ndarray:
    q = np.asarray(q, float)
    if family == "beta":
        return special.betaincinv(params["a"], params["b"], q)
    if family == "gamma":
        return special.gammaincinv(params["a"], q) / params["rate"]
    return np.exp(params["mu"] + params["sigma"] * special.ndtri(q))


def _grid(family: str, params_list: list[dict], marks: list[float]) -> np.ndarray:
    hi = max([float(quantile(family, p, 0.995)) for p in params_list] + [1.25 * m for m in marks])
    if family == "beta":
        hi = min(hi, 1.0)
        return np.linspace(hi / 4000, hi * (1 - 1e-9), 800)
    lo = min([float(quantile(family, p, 0.001)) for p in params_list] + [0.8 * m for m in marks])
    return np.linspace(max(lo, hi / 4000) * 0.5, hi, 800)


def _scale(variable: str) -> tuple[float, str]:
    return (100.0, f"{variable} (%)") if variable == "p" else (1.0, variable)


def _elicited_panel(ax, e: dict) -> None:
    stated = [f["stated"] for f in e["fitted"]]
    grid = _grid(e["family"], [e["params"]], stated)
    k, label = _scale(e["variable"])
    ax.plot(grid * k, density(e["family"], e["params"], grid), color=INK, label=e["prior"])
    for f in e["fitted"]:
        ax.axvline(f["stated"] * k, color=MID, linestyle="--", linewidth=0.9)
        ax.annotate(f"P <= {f['prob']:.3g}", (f["stated"] * k, 0), xytext=(2, 4),
                    textcoords="offset points", fontsize=6, color=MID, rotation=90)
    ax.set_xlabel(label)
    ax.set_yticks([])
    ax.set_title("stated: " + "; ".join(s["text"] for s in e["statements"]))
    ax.legend(loc="upper right")


def _compared_panel(ax, sens: dict, limit: float | None = None) -> bool:
    """The proper Beta or gamma priors of the set on a log axis, as densities of ln X
    (x f(x)), so that a flat and a sharp prior can be compared on one plot."""
    drawable = [p for p in sens["priors"] if p["family"] in ("beta", "gamma")
                and all(v > 0 for v in p["params"].values())]
    if not drawable:
        return False
    family = drawable[0]["family"]
    drawable = [p for p in drawable if p["family"] == family]
    lo = min(float(quantile(family, p["params"], 0.001)) for p in drawable)
    hi = max(float(quantile(family, p["params"], 0.999)) for p in drawable)
    lo = max(lo, hi * 1e-8, 1e-300)
    grid = np.geomspace(lo, min(hi, 1 - 1e-9) if family == "beta" else hi, 800)
    k, label = _scale("p" if family == "beta" else "failure rate")
    top = 0.0
    for j, p in enumerate(drawable):
        # each prior over its central 99% (densities of ln X are unbounded at the ends for
        # shapes below 1)
        a, b = (float(quantile(family, p["params"], q)) for q in (0.005, 0.995))
        x = grid[(grid >= a) & (grid <= b)]
        y = x * density(family, p["params"], x)
        top = max(top, float(np.max(y))) if y.size else top
        ax.plot(x * k, y, color=INK if j % 2 == 0 else MID,
                linestyle=_STYLES[j % len(_STYLES)], label=p["label"])
    if limit is not None:
        ax.axvline(limit * k, color=INK, linewidth=0.9, label="limit")
    skipped = [p["label"] for p in sens["priors"] if p not in drawable]
    ax.set_xscale("log")
    ax.set_ylim(0, 1.1 * top if top > 0 else 1.0)
    ax.set_xlabel(label + ", log scale")
    ax.set_yticks([])
    ax.set_title("priors of the sensitivity set, as densities of log " + label.split(" ")[0]
                 + (f" (not drawn: {', '.join(skipped)})" if skipped else ""))
    ax.legend(loc="upper left", fontsize=6)
    return True


def prior_figure(record: dict):
    """The figure, or None when the record holds nothing to draw."""
    elicited = record.get("prior_elicited") or []
    sens = record.get("sensitivity")
    panels = len(elicited) + (1 if sens else 0)
    params = record.get("prior_params")
    if panels == 0 and not params:
        return None
    plt = pyplot()
    fig, axes = plt.subplots(max(panels, 1), 1, figsize=(7.0, 2.4 * max(panels, 1)),
                             squeeze=False)
    axes = list(axes.ravel())
    for ax, e in zip(axes, elicited, strict=False):
        _elicited_panel(ax, e)
    drawn = bool(elicited)
    if sens:
        limit = (record.get("question") or {}).get("spec") if record.get("kind") == "lots" \
            else None
        drawn = _compared_panel(axes[len(elicited)], sens, limit) or drawn
        if not drawn or len(axes) > len(elicited):
            if not axes[len(elicited)].lines:
                axes[len(elicited)].axis("off")
    if panels == 0 and params:
        ax = axes[0]
        grid = _grid("beta", [params], [])
        ax.plot(grid * 100, density("beta", params, grid), color=INK,
                label=f"p ~ Beta({params['a']:.4g}, {params['b']:.4g})")
        ax.set_xlabel("p (%)")
        ax.set_yticks([])
        ax.legend(loc="upper right")
        drawn = True
    if not drawn:
        plt.close(fig)
        return None
    for ax in axes:
        ax.grid(True, color=LIGHT, linewidth=0.4)
    fig.tight_layout()
    return fig


def prior_png(record: dict) -> bytes:
    """The figure as PNG bytes (a blank note when there is nothing to draw)."""
    plt = pyplot()
    fig = prior_figure(record)
    if fig is None:
        fig, ax = plt.subplots(figsize=(5, 1))
        ax.axis("off")
        ax.text(0, 0.5, "no prior density to draw (improper or sampled priors only)",
                fontsize=8)
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    plt.close(fig)
    return buf.getvalue()
