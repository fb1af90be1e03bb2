"""``qualbayes plan ...`` end to end: outputs, evidence files, refusals, bad input, the
history prior and its convergence gate."""

import json

import pytest
from conftest import EXAMPLES
from helpers import heavy_imports

from qualbayes.caution import CAUTION
from qualbayes.cli import main
from qualbayes.errors import EXIT_INPUT, EXIT_REFUSED, OptionError
from qualbayes.evidence.output_set import MARKER  # written with every output set

ATTRIBUTE = ["plan", "attribute", "--reliability", "0.9", "--confidence", "0.9",
             "--failures", "2"]
LIFE = ["plan", "life", "--reliability", "0.9", "--confidence", "0.9", "--mission", "1000",
        "--shape", "2", "--units", "10", "--failures", "1"]
MTBF = ["plan", "mtbf", "--mtbf", "600", "--confidence", "0.8", "--failures", "2",
        "--rate-prior", "gamma:2,1400"]
SAMPLING = ["plan", "sampling", "--aql", "1%", "--alpha", "0.05", "--ltpd", "5%",
            "--beta", "0.10"]


def _json(argv, capsys):
    assert main([*argv, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def _rows(record, name="Plans"):
    t = next(t for t in record["tables"] if t["name"] == name)
    return [dict(zip(t["columns"], r, strict=True)) for r in t["rows"]]


def test_attribute_json_gives_the_success_run_table(capsys):
    rec = _json(ATTRIBUTE, capsys)
    assert rec["kind"] == "plan" and rec["plan"] == "attribute"
    # success-run and binomial sizes (docs/references.md for c = 0; binomial definition otherwise)
    assert [r["units n"] for r in _rows(rec)] == [22, 38, 52]
    assert rec["caution"] == CAUTION
    assert any("independently" in a for a in rec["assumptions"])


def test_attribute_bayes_with_design_prior_and_wanted_assurance(capsys):
    rec = _json([*ATTRIBUTE, "--reliability-prior", "beta:20,1", "--design-prior",
                 "beta:40,1.5", "--assurance", "0.8"], capsys)
    rows = _rows(rec)
    assert all(r["units n"] < r["classical n"] for r in rows)
    assert all(r["P(R >= goal | c of n)"] >= 0.9 for r in rows)
    want = _rows(rec, "Wanted assurance")[0]
    assert want["reached"] and want["assurance"] >= 0.8
    assert [c["name"] for c in rec["curves"]] == ["oc", "assurance"]


def test_life_text_states_shape_assumption_and_caution(capsys):
    assert main(LIFE) == 0
    out = capsys.readouterr().out
    assert "shape" in out and "assumptions:" in out
    assert CAUTION in out
    assert "success-run plan (L = 1, c = 0) needs 22 units" in out


def test_life_shape_range(capsys):
    rec = _json([*LIFE[:8], "--shape-range", "1.5,3", *LIFE[10:]], capsys)
    rows = _rows(rec)
    assert len(rows) == 2 and all(r["P(pass | R = goal)"] == pytest.approx(0.1) for r in rows)
    assert any("lognormal" in a for a in rec["assumptions"])


def test_mtbf_reproduces_the_nist_example(capsys):
    rec = _json(MTBF, capsys)
    row = _rows(rec)[2]
    # NIST/SEMATECH e-Handbook 8.3.1.5 / 8.4.6: 1909 h; posterior median 901 h, bound 600 h
    assert round(row["Bayesian test time"]) == 1909
    assert round(row["posterior median MTBF if r"]) == 901
    assert round(row["posterior lower 80% bound if r"]) == 600
    assert "IEC 61124 (constant failure rate compliance tests)" in rec["standards"]


def test_sampling_json_and_prior_view(capsys):
    rec = _json([*SAMPLING, "--lot-quality-prior", "beta:1,100", "--spec", "2%"], capsys)
    plan = _rows(rec, "Plan")[0]
    assert plan["P(accept) at AQL"] >= 0.95
    assert plan["P(accept) at LTPD = consumer's risk"] <= 0.10
    acc = _rows(rec, "Accepted lots")
    assert acc[0]["spec s"] == pytest.approx(0.02)


def test_out_writes_pngs_record_and_workbook_and_refuses_to_overwrite(tmp_path, capsys):
    out = tmp_path / "ev"
    argv = [*MTBF, "--out", str(out)]
    assert main(argv) == 0
    names = sorted(p.name for p in out.iterdir() if p.name != MARKER)
    assert names == ["plan_mtbf.json", "plan_mtbf.xlsx", "plan_mtbf_assurance.png",
                     "plan_mtbf_oc.png"]
    for png in out.glob("*.png"):
        assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    rec = json.loads((out / "plan_mtbf.json").read_text())
    assert rec["command"].startswith("qualbayes plan mtbf")
    from openpyxl import load_workbook

    wb = load_workbook(out / "plan_mtbf.xlsx")
    assert {"Summary", "Plans", "Assumptions and cautions", "Provenance"} <= set(wb.sheetnames)
    assert wb["Assumptions and cautions"]["A1"].value == CAUTION
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    capsys.readouterr()
    assert main(argv) == EXIT_REFUSED
    assert "refusing to overwrite" in capsys.readouterr().err
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before
    assert main([*argv, "--force"]) == 0


@pytest.mark.parametrize("argv, match", [
    (["plan", "attribute", "--reliability", "1.2", "--confidence", "0.9"], "--reliability"),
    (["plan", "attribute", "--reliability", "0", "--confidence", "0.9"], "--reliability"),
    (["plan", "attribute", "--reliability", "0.9", "--confidence", "1"], "--confidence"),
    (["plan", "attribute", "--reliability", "0.9", "--confidence", "-0.5"], "--confidence"),
    (["plan", "attribute", "--reliability", "0.9", "--confidence", "0.9", "--failures", "-1"],
     "--failures"),
    (["plan", "attribute", "--reliability", "0.9", "--confidence", "0.9", "--assurance",
      "0.8"], "design prior"),
    (["plan", "attribute", "--reliability", "0.9", "--confidence", "0.9",
      "--reliability-prior", "beta:-1,2"], "--reliability-prior"),
    (["plan", "life", "--reliability", "0.9", "--confidence", "0.9", "--mission", "100",
      "--shape", "2", "--units", "2", "--failures", "3"], "more units"),
    (["plan", "life", "--reliability", "0.9", "--confidence", "0.9", "--mission", "-100",
      "--shape", "2", "--units", "5"], "--mission"),
    (["plan", "life", "--reliability", "0.9", "--confidence", "0.9", "--mission", "100",
      "--shape-range", "3,1.5", "--units", "5"], "--shape-range"),
    (["plan", "life", "--reliability", "0.9", "--confidence", "0.9", "--mission", "100",
      "--shape", "2", "--units", "-4"], "--units"),
    (["plan", "mtbf", "--mtbf", "600", "--confidence", "0.8", "--failures", "-2"],
     "--failures"),
    (["plan", "mtbf", "--mtbf", "600", "--confidence", "1.8"], "--confidence"),
    (["plan", "sampling", "--aql", "5%", "--ltpd", "5%"], "below LTPD"),
    (["plan", "sampling", "--aql", "6%", "--ltpd", "5%"], "below LTPD"),
    (["plan", "sampling", "--aql", "1%", "--ltpd", "5%", "--alpha", "1.5"], "--alpha"),
    (["plan", "sampling", "--aql", "1%", "--ltpd", "5%", "--lot-size", "-10"], "--lot-size"),
])
def test_bad_input_is_a_clear_error_and_writes_nothing(argv, match, tmp_path, capsys):
    out = tmp_path / "ev"
    assert main([*argv, "--out", str(out)]) == EXIT_INPUT
    err = capsys.readouterr().err
    assert match in err and "nothing was written" in err
    assert not out.exists()


def test_plan_commands_never_import_jax():
    argvs = [[*a, "--json"] for a in (ATTRIBUTE, LIFE, MTBF, SAMPLING)]
    assert heavy_imports(*argvs) == []


# --------------------------------------------------------------------------- history prior

def test_history_needs_a_part_when_the_file_has_several(capsys):
    argv = [*ATTRIBUTE, "--history", str(EXAMPLES / "incoming_inspection.csv")]
    assert main(argv) == EXIT_INPUT
    assert "--part" in capsys.readouterr().err


def test_failed_convergence_gate_gives_no_plan(monkeypatch, tmp_path, capsys):
    from qualbayes.planning import history as hist

    failed = hist.HistoryPrior(
        None, "lots.csv", None, "KV-220", 14, 3000, 2, "0" * 64,
        {"passed": False, "max_rhat": 1.2, "min_ess_bulk": 40.0, "min_ess_tail": 30.0,
         "divergences": 3, "reasons": ["R-hat of mu[KV-220] is 1.200 (> 1.01)"]})
    monkeypatch.setattr(hist, "learn_prior", lambda *a, **k: failed)
    for argv in ([*ATTRIBUTE, "--history", "lots.csv", "--part", "KV-220"],
                 [*SAMPLING, "--history", "lots.csv", "--part", "KV-220"]):
        rec = _json(argv, capsys)
        assert rec["verdict"] == "not-converged"
        assert rec["tables"] == [] and rec["curves"] == []
        assert rec["caution"] == CAUTION
    assert main([*ATTRIBUTE, "--history", "lots.csv", "--part", "KV-220"]) == 0
    out = capsys.readouterr().out
    assert "FAILED" in out and "no plan" in out and CAUTION in out


def test_learned_history_prior_end_to_end(capsys):
    # real NUTS fit of one part's lots (the demo file), gate checked, then plans from it
    from qualbayes.planning import attribute, plans
    from qualbayes.planning.history import learn_prior

    h = learn_prior(EXAMPLES / "incoming_inspection.csv", part="KV-220")
    assert h.passed, h.gate["reasons"]
    assert h.gate["max_rhat"] <= 1.01 and h.gate["min_ess_bulk"] >= 400
    rec = plans.plan_attribute(0.995, 0.9, 2, analysis="history", history=h)
    assert rec["verdict"] == "plan"
    for row in _rows(rec):
        n, c = row["units n"], row["allowed failures c"]
        if n is None:
            continue
        assert row["P(R >= goal | c of n)"] >= 0.9
        if n > c:  # one unit fewer no longer demonstrates the goal
            assert attribute.prob_demonstrated(h.prior, 0.995, n - 1, c) < 0.9
    # the numbers that decide the plan carry the Monte Carlo error of the history's draws
    assert h.chains == 4 and 0 < h.describe()["mean_defect_rate_mcse"] < h.prior.mean()
    mc = {t["name"]: t for t in rec["tables"]}["Monte Carlo error"]
    plan_rows = {r["allowed failures c"]: r for r in _rows(rec)}
    for row in mc["rows"]:
        named = dict(zip(mc["columns"], row, strict=True))
        p = plan_rows[named["allowed failures c"]]["P(R >= goal | c of n)"]
        assert named["P(R >= goal | c of n)"] == pytest.approx(p, rel=1e-12)
        assert 0 < named["MCSE of P"] < 0.05
    samp = plans.plan_sampling(0.005, 0.05, 0.03, 0.10, history=h)
    assert any(t["name"] == "Accepted lots" for t in samp["tables"])
    mc = {t["name"]: t for t in samp["tables"]}["Monte Carlo error"]
    assert 0 < mc["rows"][0][2] < 0.05 and 0 < mc["rows"][0][4] < 0.05
    with pytest.raises(OptionError):
        plans.plan_attribute(0.9, 0.9, 0, analysis="history")
