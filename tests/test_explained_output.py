"""Numbers people read, and output that explains itself: the one formatter, the terminal's
explanation lines, finite-lot columns, the prior-range line, help text, run metadata and
the workbook's display formats."""

import json
import re

import pytest
from helpers import LOT_HEADER, write_csv

from qualbayes.cli import build_parser, main
from qualbayes.evidence import numbers


@pytest.mark.parametrize("value,unit,text", [
    (0.00297607, "%", "0.298%"), (7.938e-57, "%", "<0.0001%"), (1e-308, "%", "<0.0001%"),
    (0.0, "%", "0%"), (0.25, "%", "25%"), (0.0042, "ppm", "4,200 ppm"),
    (3e-9, "ppm", "<0.01 ppm"), (0.012345, "fraction", "0.0123"), (None, "%", "-")])
def test_rates_in_the_unit_of_the_limit(value, unit, text):
    assert numbers.rate(value, unit) == text


@pytest.mark.parametrize("value,text", [
    (0.95, "0.9500"), (0.123456, "0.1235"), (4e-5, "<0.0001"), (0.99995, ">0.9999"),
    (0.0, "0"), (1.0, "1"), (0.0001, "0.0001"), (0.9999, "0.9999"), (float("nan"), "-")])
def test_probabilities_to_four_decimals_with_open_ends(value, text):
    assert numbers.probability(value) == text


@pytest.mark.parametrize("value,text", [
    (113800, "113,800"), (1.138e5, "113,800"), (4685, "4,685"), (0.012345, "0.01235"),
    (2.5, "2.5"), (1.0012, "1.001"), (5e-7, "<0.0001"), (-12345.6, "-12,346")])
def test_quantities_never_in_scientific_notation(value, text):
    assert numbers.cell(value) == text
    assert "e" not in text.lower()


def test_rate_unit_follows_how_the_limit_was_written():
    assert numbers.rate_unit_of("500ppm") == "ppm" and numbers.rate_unit_of("1%") == "%"
    assert numbers.rate_unit_of("0.01") == "%"  # a bare fraction is shown in percent
    assert numbers.plural(1, "failure") == "1 failure"
    assert numbers.plural(0, "failure") == "0 failures"


@pytest.fixture
def lots_csv(tmp_path):
    rows = [["L-1", "KV-1", "S", "2026-07-01", 2000, 125, 0],
            ["L-2", "KV-1", "S", "2026-07-02", 2000, 125, 1],
            ["L-3", "KV-1", "S", "2026-07-03", 800, 80, 0]]
    return write_csv(tmp_path / "lots.csv", LOT_HEADER, rows)


def test_lots_terminal_explains_columns_gives_next_step_and_finite_lot_columns(
        lots_csv, capsys):
    assert main(["lots", str(lots_csv), "--spec", "5000ppm"]) == 0
    out = capsys.readouterr().out
    lines = out.splitlines()
    header = next(line for line in lines if line.startswith("lot "))
    assert "units left" in header and "defectives left" in header
    table_end = next(k for k in range(lines.index(header), len(lines)) if not lines[k].strip()
                     or lines[k].startswith("columns:"))
    assert lines[table_end].startswith("columns:") and "clean units to accept" in \
        lines[table_end]
    assert "add --report DIR for an audit report" in out
    row = next(line for line in lines if line.startswith("L-1 "))
    assert "ppm" in row and "%" not in row  # the limit's unit
    assert "1,875" in row  # units left, thousands separated
    # a default run states no prior, so says nothing about the prior's expected range
    assert "prior in words" not in out and "fall outside" not in out


def test_prior_range_line_only_for_a_stated_prior_with_advice_when_many_disagree(
        lots_csv, capsys):
    # a prior in line with the data: stated range shown, no advice
    assert main(["lots", str(lots_csv), "--spec", "1%", "--prior", "beta:1,100"]) == 0
    out = capsys.readouterr().out
    assert "prior in words" in out and "0 of 3 lots fall outside" in out
    assert not [line for line in out.splitlines() if line.startswith("advice:")]
    # a prior centred on a 50% rate: every lot disagrees with it
    assert main(["lots", str(lots_csv), "--spec", "1%", "--prior", "beta:50,50"]) == 0
    out = capsys.readouterr().out
    advice = [line for line in out.splitlines() if line.startswith("advice:")]
    assert advice and "3 of 3 lots fall outside" in advice[0] and "--sensitivity" in advice[0]


def test_analyst_and_run_metadata_in_every_record(lots_csv, capsys):
    assert main(["lots", str(lots_csv), "--spec", "1%", "--json", "--analyst", "K. Ito"]) == 0
    rec = json.loads(capsys.readouterr().out)
    assert rec["analyst"] == "K. Ito" and rec["tool_version"]
    assert re.fullmatch(r"QB-\d{8}-[0-9A-F]{10}", rec["report_id"])
    assert rec["created_utc"].endswith("Z")
    assert main(["plan", "attribute", "--reliability", "0.9", "--confidence", "0.9",
                 "--json"]) == 0
    plan = json.loads(capsys.readouterr().out)
    assert plan["report_id"] and plan["created_utc"] and plan["analyst"] is None


def test_workbook_keeps_full_precision_with_display_formats(lots_csv, tmp_path, capsys):
    from openpyxl import load_workbook

    assert main(["lots", str(lots_csv), "--spec", "1%", "--out", str(tmp_path / "o")]) == 0
    capsys.readouterr()
    ws = load_workbook(tmp_path / "o" / "lot_decisions.xlsx")["Decisions"]
    head = [c.value for c in ws[1]]
    prob = ws.cell(row=2, column=head.index("P(within spec)") + 1)
    mean = ws.cell(row=2, column=head.index("posterior mean") + 1)
    size = ws.cell(row=2, column=head.index("lot size") + 1)
    assert isinstance(prob.value, float) and prob.number_format == "0.0000"
    assert mean.value == pytest.approx(1 / 127) and mean.number_format == "0.0000%"
    assert size.value == 2000 and size.number_format == "#,##0"


def _help(*argv) -> str:
    parser = build_parser()
    sub = parser._subparsers._group_actions[0].choices
    p = sub[argv[0]]
    for name in argv[1:]:
        p = p._subparsers._group_actions[0].choices[name]
    return p.format_help()


@pytest.mark.parametrize("argv", [("lots",), ("life",), ("plan", "sampling"),
                                  ("plan", "attribute")])
def test_help_states_each_default_once(argv):
    text = " ".join(_help(*argv).split())
    for option in re.split(r"\s(?=--[a-z])", text):
        assert option.count("default") <= 1, option


def test_life_help_shows_a_life_column_mapping():
    text = " ".join(_help("life").split())
    assert "--columns 'time=" in text and "inspected=" not in text
    assert "inspected=" in " ".join(_help("lots").split())


def test_page_margin_text_from_a_record_cannot_break_out_of_the_styles():
    from qualbayes.evidence.document import Report, Section
    from qualbayes.evidence.html import render_html

    hostile = '</style><b id="x">"\\'
    html = render_html(Report("t", "s", [Section("A", [])], meta={"report_id": hostile},
                              caution="CAUTION"), {})
    style = html[html.index("<style>"):html.index("</style>")]
    assert "<" not in style[1:] and "</style><b" not in html
    assert html.count("</style>") == 1
