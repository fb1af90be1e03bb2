"""The run record of a returns forecast, its terminal text, workbook sheets and figure."""

from __future__ import annotations

from qualbayes.caution import CAUTION, STANDARDS
from qualbayes.evidence.jsonout import plain
from qualbayes.evidence.life_plots import STYLE
from qualbayes.evidence.terminal import table as text_table

FORECAST_MODEL = (
    "each unit in service, of age a, fails in coming period k with probability "
    "(S(a + (k-1)u) - S(a + ku)) / S(a) (u = life units per period); units of one age form a "
    "multinomial cohort; counts are drawn per posterior draw of the life law (posterior "
    "predictive), so the bounds carry both the uncertainty in the life law and the chance "
    "of which units fail")


def returns_record(forecast: dict | None, life: dict, fleet, sha256: dict, command: str,
                   versions: dict, question: dict) -> dict:
    """``question``: horizon, period, usage, confidence, spares (as given, so that a record
    without a forecast, after a failed gate, still says what was asked)."""
    c, horizon, period = question["confidence"], question["horizon"], question["period"]
    return plain({
        "kind": "returns",
        "question": {**question,
                     "asked": f"how many units in service will fail in each of the next "
                              f"{horizon} {period}s, and in total?",
                     "interval": f"central {c:.0%} predictive interval"},
        "input": {"fleet": fleet.file, "fleet_sheet": fleet.sheet,
                  "fleet_sha256": sha256["fleet"], "life": life["file"],
                  "life_sha256": sha256["life"], "fleet_columns": fleet.headers,
                  "units_in_service": float(fleet.counts.sum()), "rows_read": len(fleet.ages),
                  "notes": fleet.notes},
        "life": life, "model": FORECAST_MODEL, "forecast": forecast,
        "caution": CAUTION, "standards": list(STANDARDS), "command": command,
        "versions": versions,
    })


def _block(g: dict, period: str, confidence: float) -> list[str]:
    rows = [[p["period"], f"{p['expected']:.1f}",
             f"{p['expected_band'][0]:.1f} - {p['expected_band'][1]:.1f}",
             f"{p['median']:.0f}", f"{p['interval'][0]:.0f} - {p['interval'][1]:.0f}",
             f"{p['cumulative_median']:.0f}",
             f"{p['cumulative_interval'][0]:.0f} - {p['cumulative_interval'][1]:.0f}"]
            for p in g["periods"]]
    t = g["total"]
    head = [f"[{g['group']}] {g['units']:,} units in service (ages {g['youngest_age']:,.0f} "
            f"to {g['oldest_age']:,.0f}); total failures over the horizon: median "
            f"{t['median']:.0f}, {confidence:.0%} interval {t['interval'][0]:.0f} - "
            f"{t['interval'][1]:.0f} (expected {t['expected']:.1f})"]
    if "spares" in g:
        s = g["spares"]
        head.append(f"[{g['group']}] P(total failures <= {s['stock']} spares) = "
                    f"{s['prob_enough']:.4f} (Monte Carlo error {s['prob_enough_mc_error']:.4f})")
    return head + [text_table([period, "expected", "expected band", "median",
                               f"{confidence:.0%} interval", "cumulative",
                               "cumulative interval"], rows, "rrlrlrl")]


def returns_text(record: dict) -> str:
    q, fc, life = record["question"], record["forecast"], record["life"]
    d = life["diagnostics"]
    lines = [f"Field failures: {q['asked']}",
             f"installed base: {record['input']['fleet']}, "
             f"{record['input']['units_in_service']:,.0f} units; life posterior from "
             f"{life['file']} ({life['source']})",
             f"usage: {q['usage']:g} life units per {q['period']}",
             f"convergence gate of the life fit: {'passed' if d['passed'] else 'FAILED'} "
             f"(max R-hat {d['max_rhat']:.4f}, min bulk ESS {d['min_ess_bulk']:.0f}, min "
             f"tail ESS {d['min_ess_tail']:.0f}, divergences {d['divergences']})",
             f"model: {record['model']}", ""]
    if not d["passed"]:
        lines += ["no forecast: the life posterior did not pass the convergence gate", "",
                  CAUTION]
        return "\n".join(lines)
    for g in [*fc["groups"], fc["overall"]]:
        lines += _block(g, q["period"], q["confidence"]) + [""]
    lines += [f"note: {n}" for n in fc["notes"] + life.get("notes", [])]
    lines += ["", CAUTION]
    return "\n".join(lines)


def returns_sheets(record: dict) -> dict:
    fc = record["forecast"]
    rows = [["group", "period", "expected", "expected band low", "expected band high",
             "median", "interval low", "interval high", "cumulative median",
             "cumulative low", "cumulative high"]]
    groups = [*fc["groups"], fc["overall"]] if fc else []
    for g in groups:
        for p in g["periods"]:
            rows.append([g["group"], p["period"], p["expected"], *p["expected_band"],
                         p["median"], *p["interval"], p["cumulative_median"],
                         *p["cumulative_interval"]])
    totals = [["group", "units", "total median", "total low", "total high", "expected",
               "P(enough spares)", "Monte Carlo error"]]
    for g in groups:
        s = g.get("spares") or {}
        totals.append([g["group"], g["units"], g["total"]["median"], *g["total"]["interval"],
                       g["total"]["expected"], s.get("prob_enough"),
                       s.get("prob_enough_mc_error")])
    life = record["life"]
    model = [["question", record["question"]["asked"]], ["model", record["model"]],
             ["life source", life["source"]], *[["life prior", p] for p in life["prior"]],
             *[["life posterior", k, str(v)] for k, v in life["summary"].items()]]
    diag = [["parameter", "R-hat", "bulk ESS", "tail ESS", "passed"]] + [
        [p["name"], p["rhat"], p["ess_bulk"], p["ess_tail"], p["passed"]]
        for p in life["diagnostics"]["parameters"]]
    prov = [["fleet file", record["input"]["fleet"]],
            ["fleet SHA-256", record["input"]["fleet_sha256"]],
            ["life file", record["input"]["life"]],
            ["life SHA-256", record["input"]["life_sha256"]], ["command", record["command"]],
            *[[f"version {k}", v] for k, v in record["versions"].items()]]
    cautions = [[record["caution"]], *[[n] for n in (fc or {}).get("notes", [])],
                *[[s] for s in record["standards"]]]
    return {"Forecast per period": rows, "Totals": totals, "Model and life": model,
            "Diagnostics": diag, "Cautions": cautions, "Provenance": prov}


def forecast_figures(record: dict, max_groups: int = 20) -> list[tuple[str, object]]:
    """(name, Figure) for all units, then for each group up to ``max_groups`` (only with
    more than one group); none when there is no forecast."""
    fc = record.get("forecast")
    if not fc:
        return []
    groups = fc["groups"][:max_groups]  # empty for a fleet of one group
    return [(g["group"], draw_forecast(record, g)) for g in [fc["overall"], *groups]]


def draw_forecast(record: dict, group: dict):
    """Expected failures per period (posterior mean, band) and the predictive interval."""
    import matplotlib  # noqa: PLC0415

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt  # noqa: PLC0415

    q = record["question"]
    k = [p["period"] for p in group["periods"]]
    with plt.rc_context(STYLE):
        fig, ax = plt.subplots(figsize=(6.6, 4.2))
        ax.fill_between(k, [p["interval"][0] for p in group["periods"]],
                        [p["interval"][1] for p in group["periods"]], step="mid",
                        color="#e3e3e3", linewidth=0,
                        label=f"{q['confidence']:.0%} predictive interval (counts)")
        ax.fill_between(k, [p["expected_band"][0] for p in group["periods"]],
                        [p["expected_band"][1] for p in group["periods"]], color="#b8b8b8",
                        linewidth=0, label="band of the expected count (life uncertainty)")
        ax.plot(k, [p["expected"] for p in group["periods"]], color="black", marker="o",
                markersize=3, linewidth=1.3, label="expected failures")
        ax.set_xlabel(f"{q['period']} from now")
        ax.set_ylabel("failures per period")
        ax.set_ylim(bottom=0)
        t = group["total"]
        ax.set_title(f"Expected field failures - {group['group']}: {group['units']:,} units; "
                     f"total {t['median']:.0f} ({t['interval'][0]:.0f} - "
                     f"{t['interval'][1]:.0f}) over {len(k)} {q['period']}s", fontsize=9)
        ax.legend(loc="best", fontsize=8)
        fig.tight_layout()
    return fig
