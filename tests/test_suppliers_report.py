"""The supplier scorecard's audit report: HTML (in a headless browser), PDF (pdftotext),
workbook and JSON carry the record's numbers; `qualbayes report` rebuilds it from the run
record and refuses a tampered or malformed one, writing nothing.

One small sampled run (3 invented suppliers x 2 quarters x 3 lots, in two files, one open lot
left out) feeds every test; the other cases are records derived from it and resealed, since
the report is rendered from the record alone.
"""

import contextlib
import io
import json
import re
import sys
from html import escape
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from test_reports import (
    _browse,
    _pdf_text,
    _probed_copy,
    _white_right_margin,
    _words,
    needs_browser,
    needs_pdftotext,
    parse,
)

from qualbayes.cli import main
from qualbayes.evidence.numbers import probability, rate
from qualbayes.evidence.run_record import seal

ANALYST = "J. Okafor <SQE>"


def _with_mcse(p, mcse):
    return "-" if p is None else f"{probability(p)} ± {probability(mcse)}"


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    """One run with --out, --report and --json: (folder, evidence folder, JSON document)."""
    sys.path.insert(0, str(Path(__file__).parent))
    from supplier_sim import simulate

    base = tmp_path_factory.mktemp("suppliers")
    rates = np.array([[0.004] * 2, [0.01] * 2, [0.004, 0.02]])
    f = simulate(rates, lots=3, n=100, kappa=400, seed=5).frame.rename(columns={
        "lot": "Inspection lot", "supplier": "Vendor", "date": "Insp. start date",
        "inspected": "Sample Qty", "defectives": "Defective qty"})
    f = f[["Inspection lot", "Vendor", "Insp. start date", "Sample Qty", "Defective qty"]]
    f = f.astype({"Defective qty": object})
    first, second = base / "plant_a.csv", base / "plant_b.csv"
    f.iloc[:6].to_csv(first, index=False)
    rest = f.iloc[6:]
    open_lot = rest.iloc[[0]].assign(**{"Inspection lot": "OPEN-1", "Defective qty": None})
    pd.concat([rest, open_lot]).to_csv(second, index=False)  # an open lot: no result yet
    out, rep = base / "ev", base / "rep"
    stdout = io.StringIO()
    with contextlib.redirect_stdout(stdout):
        code = main(["suppliers", str(first), str(second), "--spec", "1%", "--period",
                     "quarter", "--seed", "3", "--out", str(out), "--report", str(rep),
                     "--analyst", ANALYST, "--json"])
    assert code == 0
    return rep, out, json.loads(stdout.getvalue())


def _record(rep: Path) -> dict:
    return json.loads((rep / "run.json").read_text())


def _rebuild(record: dict, tmp_path: Path, capsys) -> tuple[int, Path, str]:
    """Write ``record`` as a file and rebuild its report; (exit code, folder, stderr)."""
    src = tmp_path / "in" / "run.json"
    src.parent.mkdir(parents=True, exist_ok=True)
    src.write_text(json.dumps(record))
    new = tmp_path / "rebuilt"
    code = main(["report", str(src), "--report", str(new)])
    return code, new, capsys.readouterr().err


def _table(page, first_header: str, second_header: str):
    return next(t for t in page.tables if t[0][:2] == [first_header, second_header])


# ------------------------------------------------------------------ the report written

def test_report_folder_holds_every_section_in_order(run):
    rep, _, _ = run
    for name in ("report.html", "report.pdf", "evidence.xlsx", "run.json",
                 "figures/fig-supplier-rates.png"):
        assert (rep / name).stat().st_size > 0, name
    html = (rep / "report.html").read_text()
    order = ["Decision summary", "The question asked", "Inputs", "Model and prior",
             "Sampler and diagnostics", "Results", "Figures", "Caution", "Package versions",
             "Reproduce this run", "Sign-off"]
    positions = [html.index(f"<h2>{h}</h2>") for h in order]
    assert positions == sorted(positions)
    assert html.count("CAUTION: decision support only") >= 2 and "ISO 2859-1" in html
    assert "<script" not in html.lower()
    record = _record(rep)
    assert record["kind"] == "suppliers" and record["question"]["rate_unit"] == "%"
    for key in ("created_utc", "report_id", "tool_version"):
        assert record[key] and str(record[key]) in html, key
    assert record["analyst"] == ANALYST and escape(ANALYST) in html
    # the inputs: both files, each with its full SHA-256, and the open lot left out
    sources = record["input"]["sources"]
    assert len(sources) == 2 and all(s["sha256"] in html for s in sources)
    assert record["input"]["sha256"] in html
    page = parse(html)
    left_out = _table(page, "file", "row")
    assert [r[2] for r in left_out[1:]] == ["OPEN-1"]
    assert [s["lot"] for s in record["input"]["rows_skipped"]] == ["OPEN-1"]
    # the model in symbols, the gate in words with its numbers
    assert "logit mu[s,t]" in html and "worst_s" in html
    d = record["diagnostics"]
    assert d["passed"] and "Convergence gate passed" in html
    assert f"{d['min_ess_bulk']:,.0f}" in html


def test_report_tables_equal_the_record(run):
    rep, _, _ = run
    record = _record(rep)
    page = parse((rep / "report.html").read_text())
    summary = page.tables[0]
    assert summary[0][:4] == ["rank", "supplier", "median rate", "95% upper bound"]
    assert len(summary) - 1 == len(record["suppliers"]) == 3
    for row, s in zip(summary[1:], record["suppliers"], strict=True):
        assert row == [str(s["rank"]), s["supplier"], rate(s["rate_median"]),
                       rate(s["rate_upper"]),
                       _with_mcse(s["prob_above"], s["prob_above_mcse"]), s["limit_call"],
                       _with_mcse(s["prob_worst"], s["prob_worst_mcse"]), s["latest_period"],
                       _with_mcse(s["prob_latest_worse"], s["prob_latest_worse_mcse"]),
                       s["latest_call"]]
        assert re.fullmatch(r"[\d.]+%", row[2])  # rates in percent, as the limit was given
    periods = _table(page, "supplier", "period")
    assert len(periods) - 1 == len(record["periods"]) == 6
    for row, p in zip(periods[1:], record["periods"], strict=True):
        assert row[:2] == [p["supplier"], p["period"]]
        assert row[6:10] == [rate(p["rate_median"]), rate(p["interval_low"]),
                             rate(p["interval_high"]), rate(p["rate_upper"])]
        assert row[10] == _with_mcse(p["prob_above"], p["prob_above_mcse"])
    cells = [c for t in page.tables for r in t for c in r
             if not re.fullmatch(r"[0-9a-f]{64}", c)]  # SHA-256 digests are hex, not numbers
    assert not [c for c in cells if re.search(r"\d[eE][+-]?\d", c)]  # no scientific notation


def test_workbook_and_json_carry_the_same_numbers(run):
    from openpyxl import load_workbook

    rep, out, document = run
    record = _record(rep)
    assert document["suppliers"] == record["suppliers"] == _record_out(out)["suppliers"]
    assert document["periods"] == record["periods"]
    assert document["report_id"] == record["report_id"]
    for book in (rep / "evidence.xlsx", out / "supplier_scorecard.xlsx"):
        wb = load_workbook(book)
        rows = list(wb["Scorecard"].values)
        head = list(rows[0])
        for values, s in zip(rows[1:], record["suppliers"], strict=True):
            got = dict(zip(head, values, strict=True))
            for key in ("supplier", "rate_median", "prob_above", "prob_above_mcse",
                        "prob_worst", "prob_latest_worse_mcse", "limit_call", "latest_call"):
                # a spreadsheet keeps 15 significant digits of a number
                want = pytest.approx(s[key], rel=1e-14) if isinstance(s[key], float) else s[key]
                assert got[key] == want, (book.name, key)
        col = head.index("rate_median") + 1
        assert wb["Scorecard"].cell(row=2, column=col).number_format == "0.0000%"
        provenance = [list(r) for r in wb["Provenance"].values]
        flat = [str(c) for r in provenance for c in r if c is not None]
        assert all(s["sha256"] in flat for s in record["input"]["sources"])
        assert record["report_id"] in flat and "OPEN-1" in flat
        model = {r[0]: r[1] for r in wb["Model and prior"].values}
        assert model["convergence gate"].startswith("Convergence gate passed")


def _record_out(out: Path) -> dict:
    return json.loads((out / "supplier_scorecard.json").read_text())


@needs_pdftotext
def test_pdf_has_every_supplier_its_call_and_the_caution_on_each_page(run):
    rep, _, _ = run
    record = _record(rep)
    pages = _pdf_text(rep / "report.pdf")
    assert len(pages) >= 2
    for k, page in enumerate(pages, start=1):
        words = _words(page)
        assert "CAUTION: decision support only" in words, f"page {k}"
        assert f"page {k} of {len(pages)}" in words and record["report_id"] in words
    text = "\n".join(pages)
    joined = "".join(text.split())
    assert all(s["sha256"] in joined for s in record["input"]["sources"])
    for s in record["suppliers"]:
        rows = [r for r in text.splitlines() if re.match(rf"\s*{s['rank']}\s+{s['supplier']}\s",
                                                         r)]
        assert rows and s["limit_call"].split()[0] in rows[0], s["supplier"]
        assert probability(s["prob_above"]) in rows[0]
    assert "Defect rates with their intervals" in text
    signoff = _words(text[text.index("Sign-off"):])
    assert ANALYST in signoff and "reviewed and approved by" in signoff


@needs_browser
def test_html_opens_in_a_headless_browser_with_no_request_and_no_overflow(run, tmp_path):
    rep, _, _ = run
    html = rep / "report.html"
    dom, shot, from_page = _browse(html, tmp_path)
    assert from_page == []
    assert "decision-summary" in parse(dom).ids
    assert _white_right_margin(shot, 1200)
    probed, _, _ = _browse(_probed_copy(html, tmp_path), tmp_path)
    attrs = parse(probed).attrs
    assert attrs.get("data-images-loaded") == "1/1"
    assert attrs.get("data-overflow") == "0"


def test_chart_is_a_figure_in_the_unit_of_the_limit(run):
    from matplotlib.figure import Figure

    from qualbayes.evidence.supplier_plots import rates_figure

    record = _record(run[0])
    fig = rates_figure(record)
    assert isinstance(fig, Figure)
    assert fig.axes[0].get_ylabel() == "defect rate, %"
    record["question"]["rate_unit"] = "ppm"
    fig2 = rates_figure(record)
    assert fig2.axes[0].get_ylabel() == "defect rate, ppm"
    # the limit line is drawn at the limit in that unit
    lines = [ln for ln in fig2.axes[0].get_lines() if ln.get_linestyle() == "--"]
    assert lines and lines[0].get_ydata()[0] == pytest.approx(1e6 * record["question"]["spec"])


# ------------------------------------------------------------------ rebuilt from the record

def test_report_rebuilds_identically_from_its_record(run, tmp_path, capsys):
    rep, _, _ = run
    new = tmp_path / "again"
    assert main(["report", str(rep / "run.json"), "--report", str(new)]) == 0
    assert "CAUTION" in capsys.readouterr().out
    a = parse((rep / "report.html").read_text())
    b = parse((new / "report.html").read_text())
    assert a.tables == b.tables and len(a.tables) >= 6
    assert (rep / "run.json").read_text() == (new / "run.json").read_text()


def test_rates_in_ppm_when_the_limit_was_written_in_ppm(run, tmp_path, capsys):
    record = _record(run[0])
    record["question"]["rate_unit"] = "ppm"
    code, new, err = _rebuild(seal(record), tmp_path, capsys)
    assert code == 0, err
    summary = parse((new / "report.html").read_text()).tables[0]
    s = record["suppliers"][0]
    assert summary[1][2] == rate(s["rate_median"], "ppm") and summary[1][2].endswith(" ppm")


def test_failed_gate_record_gives_no_verdict_and_says_so_first(run, tmp_path, capsys):
    record = _record(run[0])
    record["diagnostics"]["passed"] = False
    record["diagnostics"]["reasons"] = ["R-hat 1.2 > 1.01 for m"]
    for s in record["suppliers"]:
        s.update({k: None for k in s if k.startswith(("rate_", "prob_"))})
        s.update(limit_call="not-converged", latest_call="not-converged")
    for p in record["periods"]:
        p.update({k: None for k in p if k.startswith(("rate_", "prob_", "interval_"))})
    code, new, err = _rebuild(seal(record), tmp_path, capsys)
    assert code == 0, err
    html = (new / "report.html").read_text()
    assert html.index('id="gate-alert"') < html.index("<h2>Decision summary</h2>")
    assert "CONVERGENCE GATE FAILED" in html
    summary = parse(html).tables[0]
    assert {r[5] for r in summary[1:]} == {"not-converged"}
    assert {r[4] for r in summary[1:]} == {"-"}  # no probability


def test_a_record_without_periods_rebuilds_with_one_row_per_supplier(run, tmp_path, capsys):
    # rendering only: the record is reshaped as the scorecard writes it without --period
    # (one "(all)" cell per supplier, no latest-period call)
    record = _record(run[0])
    record["question"]["period"] = None
    cells = []
    for s in record["suppliers"]:
        mine = [p for p in record["periods"] if p["supplier"] == s["supplier"]]
        s.update(latest_period=None, prob_latest_worse=None, prob_latest_worse_mcse=None,
                 latest_call=None, periods=1)
        cells.append({**mine[0], "period": "(all)", "lots": s["lots"],
                      "inspected": s["inspected"], "defectives": s["defectives"],
                      "rate_median": s["rate_median"], "rate_upper": s["rate_upper"],
                      "interval_low": min(p["interval_low"] for p in mine),
                      "interval_high": max(p["interval_high"] for p in mine),
                      "prob_above": s["prob_above"], "prob_above_mcse": s["prob_above_mcse"]})
    record["periods"] = cells
    code, new, err = _rebuild(seal(record), tmp_path, capsys)
    assert code == 0, err
    page = parse((new / "report.html").read_text())
    assert page.tables[0][0][-1] == "P(worst) ± MCSE"  # no latest-period columns
    assert [r[1] for r in page.tables[0][1:]] == [s["supplier"] for s in record["suppliers"]]
    from qualbayes.evidence.supplier_plots import rates_figure

    fig = rates_figure(record)
    assert [t.get_text() for t in fig.axes[0].get_yticklabels()] == [
        s["supplier"] for s in record["suppliers"]][::-1]
    # a latest-period call in a record without periods is refused
    record["suppliers"][0]["latest_call"] = "worse"
    code, new, err = _rebuild(seal(record), tmp_path / "again", capsys)
    assert code == 2 and "no periods were asked for" in err and not new.exists()


# ------------------------------------------------------------------ refused, nothing written

def test_a_hand_edit_is_refused_naming_the_supplier(run, tmp_path, capsys):
    record = _record(run[0])
    record["suppliers"][1]["prob_above"] = 0.001  # edited, not resealed
    code, new, err = _rebuild(record, tmp_path, capsys)
    assert code == 2 and not new.exists()
    name = record["suppliers"][1]["supplier"]
    assert "digest does not match" in err and f"key 'suppliers' item 2 ('{name}')" in err


def _edit(key: str):
    def change(r):
        s0, p0 = r["suppliers"][0], r["periods"][0]
        if key == "missing":
            del s0["limit_call"]
        elif key == "type":
            s0["inspected"] = "600"
        elif key == "counts":
            p0["defectives"] = p0["inspected"] + 1
        elif key == "call":
            s0["limit_call"] = "within limit"
        elif key == "verdict-after-failed-gate":
            r["diagnostics"]["passed"] = False
        elif key == "worst":
            s0["prob_worst"] = min(1.0, s0["prob_worst"] + 0.2)
        elif key == "unit":
            r["question"]["rate_unit"] = "furlongs"
        elif key == "rank":
            s0["rank"] = 3
        elif key == "totals":
            s0["defectives"] += 1
        return r
    return change


@pytest.mark.parametrize(("edit", "says"), [
    ("missing", "suppliers[0].limit_call': is missing"),
    ("type", "suppliers[0].inspected': expected a whole number >= 0"),
    ("counts", "periods[0].defectives': exceeds the units inspected"),
    ("call", "says 'within limit' but its recorded probability"),
    ("verdict-after-failed-gate", "although its convergence gate failed"),
    ("worst", "P(worst) sums to"),
    ("unit", "question.rate_unit"),
    ("rank", "are not 1, 2, ... in order"),
    ("totals", "differ from the sum of its periods"),
])
def test_a_resealed_but_malformed_record_is_refused(run, tmp_path, capsys, edit, says):
    record = _edit(edit)(_record(run[0]))
    code, new, err = _rebuild(seal(record), tmp_path, capsys)
    assert code == 2, err
    assert says in err and "run record" in err
    assert not new.exists()  # nothing written


def test_the_record_check_accepts_too_close_to_call():
    from qualbayes.evidence.supplier_checks import check_supplier_calls

    base = {"question": {"confidence": 0.95, "period": None},
            "diagnostics": {"passed": True}, "periods": []}
    rows = [{"supplier": "A", "periods": 1, "rate_median": 0.02, "prob_above": 0.951,
             "prob_above_mcse": 0.004, "prob_worst": 0.6, "prob_worst_mcse": 0.01,
             "limit_call": "too close to call", "latest_call": None},
            {"supplier": "B", "periods": 1, "rate_median": 0.01, "prob_above": 0.2,
             "prob_above_mcse": 0.01, "prob_worst": 0.4, "prob_worst_mcse": 0.01,
             "limit_call": "undecided", "latest_call": None}]
    check_supplier_calls("r.json", {**base, "suppliers": rows})
    # the same probability with a verdict is refused: 0.951 lies within 3 MCSE of 0.95
    rows[0]["limit_call"] = "above limit"
    from qualbayes.errors import InputError

    with pytest.raises(InputError, match="gives 'too close to call'"):
        check_supplier_calls("r.json", {**base, "suppliers": rows})


# ------------------------------------------------------------------ help text

def test_sheet_help_says_how_the_sheet_is_picked():
    from qualbayes.cli import build_parser

    for command in ("lots", "life", "suppliers"):
        text = io.StringIO()
        with contextlib.redirect_stdout(text), pytest.raises(SystemExit):
            build_parser().parse_args([command, "--help"])
        words = " ".join(text.getvalue().split())
        assert "first visible" not in words, command
        assert "needed columns" in words, command
        for option in re.split(r"\s(?=--[a-z])", words):
            assert option.count("default") <= 1, option
        if command == "suppliers":
            assert "--report DIR" in words and "--analyst NAME" in words
    # stress-life and fleet files are read from the first visible sheet: their help says so
    for command in ("at-use", "returns"):
        text = io.StringIO()
        with contextlib.redirect_stdout(text), pytest.raises(SystemExit):
            build_parser().parse_args([command, "--help"])
        assert "default: the first visible one" in " ".join(text.getvalue().split())
