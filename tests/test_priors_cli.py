"""The prior options on the commands: --believe, --earlier / --earlier-weight, --sensitivity;
the records carry the prior's words, the weight and the sensitivity section; the text,
workbook, figure and report show them; bad options exit 2 and write nothing."""

from __future__ import annotations

import functools
import json
import subprocess
import sys

import pytest
from conftest import EXAMPLES
from openpyxl import load_workbook

from qualbayes.cli import main
from qualbayes.evidence.output_set import MARKER  # written with every output set

LOTS = ["lots", str(EXAMPLES / "incoming_inspection.csv"), "--spec", "1%"]
STATED = ["--believe", "p=0.2%", "--believe", "p<0.8%@90%"]
EARLIER = ["--earlier", "2/1500", "--earlier-weight", "0.5"]


def _json(argv, capsys):
    assert main([*argv, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


# --------------------------------------------------------------------------- lots

def test_lots_record_carries_words_weight_and_sensitivity(capsys):
    rec = _json([*LOTS, *STATED, *EARLIER, "--sensitivity"], capsys)
    assert rec["earlier_data"]["weight"] == 0.5
    assert rec["earlier_data"]["failures"] == 2 and rec["earlier_data"]["units"] == 1500
    (e,) = rec["prior_elicited"]
    assert e["family"] == "beta" and [f["prob"] for f in e["fitted"]] == [0.5, 0.9]
    assert any("weight 0.5" in w for w in rec["prior_words"])
    assert any("expects" in w for w in rec["prior_words"])
    sens = rec["sensitivity"]
    assert len(sens["items"]) == len(rec["lots"])
    # the as-run row is the analysis itself
    for lot, item in zip(rec["lots"], sens["items"], strict=True):
        assert item["results"][0]["prob"] == lot["prob_within_spec"]
        assert item["results"][0]["decision"] == lot["decision"]
        assert "priors" in item["summary"]
    assert all(p.get("predictive") for p in sens["priors"])
    assert "weight 0.5" in rec["prior"]


def test_lots_text_shows_the_prior_and_the_sensitivity_table(capsys):
    assert main([*LOTS, *EARLIER, "--sensitivity"]) == 0
    out = capsys.readouterr().out
    assert "prior in words: Borrowed from earlier data" in out and "weight 0.5" in out
    assert "Prior sensitivity:" in out and "[1] as run" in out and "sceptical" in out
    # uniform base: "uniform = earlier data, weight 0" is one row, so five priors in all
    assert "uniform = earlier data, weight 0" in out and "of 5 priors" in out
    assert "CAUTION" in out


def test_lots_out_writes_the_prior_figure_and_sheets(tmp_path, capsys):
    out = tmp_path / "ev"
    assert main([*LOTS, *STATED, "--sensitivity", "--out", str(out)]) == 0
    assert sorted(p.name for p in out.iterdir() if p.name != MARKER) == ["lot_decisions.json",
                                                     "lot_decisions.xlsx", "lot_prior.png"]
    assert (out / "lot_prior.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    wb = load_workbook(out / "lot_decisions.xlsx", read_only=True)
    assert {"Prior", "Prior sensitivity", "Priors compared"} <= set(wb.sheetnames)
    rows = list(wb["Prior sensitivity"].iter_rows(values_only=True))
    assert len(rows) == 1 + 37 * len(json.loads((out / "lot_decisions.json").read_text())[
        "sensitivity"]["priors"])


def test_lots_without_the_new_options_is_unchanged(tmp_path, capsys):
    out = tmp_path / "ev"
    assert main([*LOTS, "--out", str(out)]) == 0
    assert sorted(p.name for p in out.iterdir() if p.name != MARKER) == ["lot_decisions.json",
                                                     "lot_decisions.xlsx"]
    wb = load_workbook(out / "lot_decisions.xlsx", read_only=True)
    assert "Prior" not in wb.sheetnames


def test_lots_report_has_the_prior_sections_and_figure(tmp_path, capsys):
    rep = tmp_path / "rep"
    assert main([*LOTS, *STATED, "--sensitivity", "--report", str(rep)]) == 0
    html = (rep / "report.html").read_text()
    assert "The prior in words" in html and 'id="prior-sensitivity"' in html
    assert (rep / "figures" / "fig-prior.png").exists()
    rebuilt = tmp_path / "again"
    assert main(["report", str(rep / "run.json"), "--out", str(rebuilt)]) == 0
    assert 'id="prior-sensitivity"' in (rebuilt / "report.html").read_text()


def test_statements_and_sensitivity_keep_jax_off_the_lots_path():
    code = (
        "import sys\n"
        "from qualbayes.cli import main\n"
        f"rc = main({[*LOTS, *STATED, *EARLIER, '--sensitivity']!r})\n"
        "assert rc == 0\n"
        "print('HEAVY', [m for m in ('jax', 'numpyro', 'arviz') if m in sys.modules])\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    assert "HEAVY []" in out


@pytest.mark.parametrize("args,words", [
    (["--believe", "p=0.5%", "--believe", "p<0.2%@90%"], "contradict"),
    (["--believe", "p<0.5%@100%"], "strictly between 0 and 1"),
    (["--earlier", "2/1500"], "--earlier-weight"),
    (["--earlier-weight", "0.5"], "without --earlier"),
    (["--earlier", "2/1500", "--earlier-weight", "1.5"], "between 0"),
    (["--believe", "p<1%@90%", "--prior", "jeffreys"], "not both"),
    (["--prior", "history", "--earlier", "2/1500", "--earlier-weight", "1"], "history"),
    (["--believe", "shape<3@90%"], "does not apply"),
    (["--earlier", "no_such_file.csv", "--earlier-weight", "1"], "no_such_file"),
])
def test_lots_bad_prior_options_exit_2_and_write_nothing(tmp_path, capsys, args, words):
    out = tmp_path / "ev"
    assert main([*LOTS, *args, "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert words in err and "nothing was written" in err
    assert not out.exists()


# --------------------------------------------------------------------------- plans

ATTRIBUTE = ["plan", "attribute", "--reliability", "0.9", "--confidence", "0.9",
             "--failures", "1"]
MTBF = ["plan", "mtbf", "--mtbf", "600", "--confidence", "0.8", "--failures", "2"]


def test_plan_attribute_with_statements_earlier_data_and_sensitivity(tmp_path, capsys):
    rec = _json([*ATTRIBUTE, "--believe", "R>0.85@95%;R=0.95", "--earlier", "1/40",
                 "--earlier-weight", "0.5", "--sensitivity"], capsys)
    assert rec["earlier_data"]["weight"] == 0.5
    assert "weight 0.5" in rec["priors"]["analysis"]
    sens = rec["sensitivity"]
    plans = next(t for t in rec["tables"] if t["name"] == "Plans")["rows"]
    assert [i["units"] for i in sens["items"]] == [r[1] for r in plans]
    for item, row in zip(sens["items"], plans, strict=True):  # the as-run row is the plan
        assert item["results"][0]["prob"] == pytest.approx(row[2], rel=1e-12)
        assert item["results"][0]["units"] == row[1]
    out = tmp_path / "ev"
    assert main([*ATTRIBUTE, "--believe", "R>0.85@95%;R=0.95", "--sensitivity", "--out",
                 str(out)]) == 0
    assert (out / "plan_attribute_prior.png").exists()
    text = capsys.readouterr().out
    assert "Prior sensitivity" in text and "demonstrated under" in text
    wb = load_workbook(out / "plan_attribute.xlsx", read_only=True)
    assert "Prior sensitivity" in wb.sheetnames


def test_plan_attribute_classical_sensitivity_uses_the_classical_rule_first(capsys):
    rec = _json([*ATTRIBUTE, "--sensitivity"], capsys)
    first = rec["sensitivity"]["priors"][0]
    assert first["family"] == "classical"
    assert [i["units"] for i in rec["sensitivity"]["items"]] == [22, 38]  # docs/references.md c=0


def test_plan_mtbf_with_statements_and_earlier_test(capsys):
    rec = _json([*MTBF, "--believe", "mtbf>300@90%", "--believe", "mtbf=900", "--earlier",
                 "2/1909", "--earlier-weight", "1", "--sensitivity"], capsys)
    e = rec["prior_elicited"][0]
    assert e["family"] == "gamma"
    a = e["params"]["a"] + 2
    assert f"shape {a:.6g}" in rec["priors"]["analysis"]
    assert rec["earlier_data"]["weight"] == 1.0
    keys = [p["key"] for p in rec["sensitivity"]["priors"]]
    assert keys[0] == "as-run" and "sceptical" in keys


@pytest.mark.parametrize("argv,words", [
    ([*ATTRIBUTE, "--believe", "R>0.9@90%", "--reliability-prior", "beta:20,1"], "not both"),
    ([*ATTRIBUTE, "--believe", "mtbf>500@90%"], "does not apply"),
    ([*MTBF, "--believe", "mtbf>500@90%", "--rate-prior", "gamma:2,1400"], "not both"),
    ([*MTBF, "--earlier", "2 in 300", "--earlier-weight", "1"], "FAILURES/TIME"),
    ([*MTBF, "--earlier", "2/300"], "--earlier-weight"),
])
def test_plan_bad_prior_options_exit_2(capsys, argv, words):
    assert main(argv) == 2
    assert words in capsys.readouterr().err


# --------------------------------------------------------------------------- life

@pytest.fixture
def small_sampler(monkeypatch):
    """Keep the life runs small (2 shared cores); the gate still applies to each."""
    import qualbayes.inference.run as inference
    import qualbayes.priors.life_sensitivity as ls

    small = functools.partial(inference.SamplerSettings, num_warmup=300, num_samples=500)
    monkeypatch.setattr(inference, "SamplerSettings", small)
    monkeypatch.setattr(ls, "SamplerSettings", small)


def test_life_with_statements_earlier_data_and_sensitivity(tmp_path, capsys, small_sampler):
    out = tmp_path / "ev"
    argv = ["life", str(EXAMPLES / "sv30_rig_test.csv"), "--mission", "5000", "--target",
            "0.9", "--confidence", "0.9", "--units", "h", "--group", "Rev B",
            "--believe", "1.5<shape<4@95%", "--earlier",
            str(EXAMPLES / "sv30_field_returns.csv"), "--earlier-weight", "0.5",
            "--sensitivity", "--out", str(out), "--json"]
    rec = _json(argv, capsys)
    assert rec["earlier_data"]["weight"] == 0.5
    assert any("weight 0.5" in p for p in rec["prior"])
    assert rec["prior_elicited"][0]["family"] == "lognormal"
    (item,) = rec["sensitivity"]["items"]
    assert item["results"][0]["decision"] == rec["groups"][0]["decision"]
    for r in item["results"][1:]:
        assert r["decision"] == "not usable" or "gate" in r
    assert (out / "life_prior.png").exists()
    wb = load_workbook(out / "life_results.xlsx", read_only=True)
    assert "Prior sensitivity" in wb.sheetnames


def test_life_bad_statements_exit_2_before_sampling(capsys):
    argv = ["life", str(EXAMPLES / "sv30_rig_test.csv"), "--mission", "5000", "--target",
            "0.9", "--believe", "1.5<shape<3@90%", "--shape-prior", "1.5,3"]
    assert main(argv) == 2 and "not both" in capsys.readouterr().err
    argv[-4:] = ["--believe", "p<1%@90%"]
    assert main(argv) == 2 and "does not apply" in capsys.readouterr().err


# --------------------------------------------------------------------------- sampling plans

SAMPLING = ["plan", "sampling", "--aql", "0.5%", "--ltpd", "3%"]


def test_plan_sampling_with_statements_earlier_lots_and_sensitivity(tmp_path, capsys):
    rec = _json([*SAMPLING, "--believe", "p<1%@90%", "--earlier", "3/800", "--earlier-weight",
                 "0.5", "--spec", "2%", "--confidence", "0.95", "--sensitivity"], capsys)
    assert rec["earlier_data"]["weight"] == 0.5
    assert rec["inputs"]["level"] == 0.95 and rec["inputs"]["limit"] == 0.02
    acc = next(t for t in rec["tables"] if t["name"] == "Accepted lots")["rows"][0]
    first = rec["sensitivity"]["items"][0]["results"][0]
    assert first["prob"] == pytest.approx(acc[3], rel=1e-12) and first["decision"] == acc[-1]
    assert "0.95" in rec["sensitivity"]["question"]
    out = tmp_path / "ev"
    assert main([*SAMPLING, "--sensitivity", "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "Prior sensitivity" in text and "protected under" in text
    assert (out / "plan_sampling_prior.png").exists()
    assert "Prior sensitivity" in load_workbook(out / "plan_sampling.xlsx",
                                                read_only=True).sheetnames


@pytest.mark.parametrize("argv,words", [
    ([*SAMPLING, "--believe", "p<1%@90%", "--lot-quality-prior", "beta:1,100"], "not both"),
    ([*SAMPLING, "--believe", "R>0.9@90%"], "does not apply"),
    ([*SAMPLING, "--confidence", "0.9"], "Bayesian view"),
    ([*SAMPLING, "--earlier", "3/800"], "--earlier-weight"),
])
def test_plan_sampling_bad_prior_options_exit_2(capsys, argv, words):
    assert main(argv) == 2
    assert words in capsys.readouterr().err


# --------------------------------------------------------------------------- life plans

LIFE_PLAN = ["plan", "life", "--reliability", "0.9", "--confidence", "0.9", "--mission",
             "1000", "--shape", "2", "--units", "10", "--failures", "1"]


def test_plan_life_with_a_prior_statements_earlier_test_and_sensitivity(tmp_path, capsys):
    rec = _json([*LIFE_PLAN, "--believe", "R>0.8@95%;R=0.9", "--earlier", "1/20",
                 "--earlier-weight", "0.5", "--sensitivity"], capsys)
    assert rec["earlier_data"]["weight"] == 0.5
    assert "weight 0.5" in rec["priors"]["analysis"]
    table = next(t for t in rec["tables"] if t["name"] == "Plans")
    cols = table["columns"]
    for item, row in zip(rec["sensitivity"]["items"], table["rows"], strict=True):
        first = item["results"][0]  # the as-run row is the plan itself
        assert first["time"] == pytest.approx(row[cols.index("time per unit")], rel=1e-12)
        assert first["prob"] == pytest.approx(row[cols.index("P(R >= goal | c of n)")],
                                              rel=1e-9)
        assert first["decision"] == "demonstrated"
    out = tmp_path / "ev"
    assert main([*LIFE_PLAN, "--reliability-prior", "beta:18,1", "--sensitivity", "--out",
                 str(out)]) == 0
    text = capsys.readouterr().out
    assert "Prior sensitivity" in text and "classical:" in text
    assert (out / "plan_life_prior.png").exists() and (out / "plan_life_assurance.png").exists()
    assert "Prior sensitivity" in load_workbook(out / "plan_life.xlsx",
                                                read_only=True).sheetnames


def test_plan_life_classical_sensitivity_uses_the_classical_rule_first(capsys):
    rec = _json([*LIFE_PLAN, "--sensitivity"], capsys)
    assert rec["sensitivity"]["priors"][0]["family"] == "classical"
    assert rec["priors"]["analysis"] == "none (classical)"


@pytest.mark.parametrize("argv,words", [
    ([*LIFE_PLAN, "--believe", "R>0.9@90%", "--reliability-prior", "beta:20,1"], "not both"),
    ([*LIFE_PLAN, "--reliability-prior", "history"], "beta:A,B"),
    ([*LIFE_PLAN, "--believe", "mtbf>500@90%"], "does not apply"),
    ([*LIFE_PLAN, "--assurance", "0.8"], "--design-prior"),
])
def test_plan_life_bad_prior_options_exit_2(capsys, argv, words):
    assert main(argv) == 2
    assert words in capsys.readouterr().err
