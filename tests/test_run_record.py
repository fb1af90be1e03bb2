"""A run record that cannot lie (issue 12, item 2): stamped, sealed with a digest, and read
back as untrusted input by ``qualbayes report``: exit 2 naming the key at fault, never a
traceback, a hang or a report showing numbers the run did not compute."""

from __future__ import annotations

import copy
import json
import os
import threading
import time
from pathlib import Path

import pytest
from helpers import write_csv

import qualbayes.evidence.run_record as run_record
from qualbayes.cli import main
from qualbayes.evidence.run_record import SCHEMA_VERSION, STAMP_KEYS, seal

HEADER = ["Lot", "Inspected", "Defects"]
ROWS = [["A", 125, 0], ["B", 80, 1], ["C", 200, 0], ["D", 50, 4]]


@pytest.fixture(scope="module")
def lots_run(tmp_path_factory) -> Path:
    d = tmp_path_factory.mktemp("rec")
    src = write_csv(d / "in.csv", HEADER, ROWS)
    assert main(["lots", str(src), "--spec", "2%", "--report", str(d / "rep"), "--out",
                 str(d / "ev")]) == 0
    return d


def rebuild(record_path: Path, out: Path, capsys) -> tuple[int, str]:
    code = main(["report", str(record_path), "--out", str(out)])
    err = capsys.readouterr().err
    assert "Traceback" not in err
    if code != 0:
        assert not out.exists()
    return code, err


def test_every_record_is_stamped_and_sealed(lots_run, capsys):
    for path in (lots_run / "rep" / "run.json", lots_run / "ev" / "lot_decisions.json"):
        record = json.loads(path.read_text())
        assert all(k in record for k in STAMP_KEYS), path
        assert record["schema_version"] == SCHEMA_VERSION
        assert record["created_utc"].endswith("Z") and record["report_id"].startswith("QB-")
        assert run_record.verify(path, record) is True
    rep = json.loads((lots_run / "rep" / "run.json").read_text())
    ev = json.loads((lots_run / "ev" / "lot_decisions.json").read_text())
    assert rep["report_id"] == ev["report_id"]  # one run, one id
    marker = json.loads((lots_run / "rep" / ".qualbayes-output.json").read_text())
    assert marker["report_id"] == rep["report_id"]
    src = lots_run / "in.csv"
    assert main(["lots", str(src), "--spec", "2%", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert all(k in doc for k in STAMP_KEYS) and "posterior_draws" not in doc
    assert run_record.verify("stdout", doc) is True


def test_the_digest_is_canonical_and_names_what_changed(lots_run):
    record = json.loads((lots_run / "rep" / "run.json").read_text())
    again = seal(record)
    assert again["digest"] == record["digest"]  # sealing is deterministic
    edited = copy.deepcopy(record)
    edited["lots"][2]["prob_within_spec"] = 0.9999
    with pytest.raises(Exception, match=r"key 'lots' item 3 \('C'\)"):
        run_record.verify("x", edited)
    edited = copy.deepcopy(record)
    edited["seed"] = 1
    with pytest.raises(Exception, match="key 'seed'"):
        run_record.verify("x", edited)


def _variants(record: dict) -> dict[str, tuple[dict | str | None, str]]:
    """name -> (record or raw text, fragment the refusal must contain)."""
    old = {k: v for k, v in record.items() if k not in (*STAMP_KEYS, "digest")}
    v: dict[str, tuple] = {}
    edited = copy.deepcopy(record)
    edited["lots"][3]["prob_within_spec"] = 0.9999  # a hand edit of a probability
    v["hand edit"] = (edited, "changed after the run")
    no_digest = copy.deepcopy(record)
    del no_digest["digest"]
    v["digest removed"] = (no_digest, "the digest was removed")
    missing = copy.deepcopy(old)
    del missing["lots"][0]["decision"]
    v["missing key"] = (missing, "key 'lots[0].decision': is missing")
    wrong = copy.deepcopy(old)
    wrong["lots"][1]["inspected"] = "80"
    v["wrong type"] = (wrong, "key 'lots[1].inspected'")
    out_of_range = copy.deepcopy(old)
    out_of_range["question"]["confidence"] = 1.5
    v["out of range"] = (out_of_range, "key 'question.confidence'")
    disagree = copy.deepcopy(old)
    disagree["lots"][3]["decision"] = "accept"  # P = 0.0x shown as accepted
    v["decision disagrees"] = (disagree, "says 'accept' but its recorded probability")
    gate = copy.deepcopy(old)
    gate["diagnostics"] = {"P": {"passed": False, "reasons": ["R-hat 1.2"]}}
    v["failed gate with a verdict"] = (gate, "convergence gate failed")
    v["deep nesting"] = ("[" * 100_000 + "]" * 100_000, "nested more than")
    v["long number"] = ('{"kind": "lots", "seed": ' + "9" * 5000 + "}", "5,000 characters")
    v["NaN"] = ('{"kind": "lots", "seed": NaN}', "NaN is not a JSON number")
    v["not an object"] = ("[1, 2]", "is not a JSON object")
    v["unknown kind"] = ({"kind": "scorecard?"}, "key 'kind'")
    v["not JSON"] = ("{'kind': 'lots'}", "not valid JSON")
    return v


CASES = ["hand edit", "digest removed", "missing key", "wrong type", "out of range",
         "decision disagrees", "failed gate with a verdict", "deep nesting", "long number",
         "NaN", "not an object", "unknown kind", "not JSON"]


@pytest.mark.parametrize("case", CASES)
def test_bad_records_exit_2_naming_the_fault(lots_run, tmp_path, capsys, case):
    record = json.loads((lots_run / "rep" / "run.json").read_text())
    content, fragment = _variants(record)[case]
    path = tmp_path / "run.json"
    path.write_text(content if isinstance(content, str) else json.dumps(content))
    code, err = rebuild(path, tmp_path / "out", capsys)
    assert code == 2 and fragment in err, err


def test_an_old_record_rebuilds_with_an_unverified_banner(lots_run, tmp_path, capsys):
    record = json.loads((lots_run / "rep" / "run.json").read_text())
    old = {k: v for k, v in record.items() if k not in (*STAMP_KEYS, "digest")}
    path = tmp_path / "old.json"
    path.write_text(json.dumps(old))
    code, _ = rebuild(path, tmp_path / "out", capsys)
    assert code == 0
    html = (tmp_path / "out" / "report.html").read_text()
    assert "UNVERIFIED RECORD" in html
    assert html.index("UNVERIFIED RECORD") < html.index("<h2>")
    ok = tmp_path / "verified"
    assert main(["report", str(lots_run / "rep" / "run.json"), "--out", str(ok)]) == 0
    assert "UNVERIFIED" not in (ok / "report.html").read_text()
    capsys.readouterr()


def test_devices_fifos_and_huge_files_are_not_read(tmp_path, capsys, monkeypatch):
    code, err = rebuild(Path("/dev/zero"), tmp_path / "a", capsys)
    assert code == 2 and "not a regular file" in err
    fifo = tmp_path / "fifo"
    os.mkfifo(fifo)
    result = {}
    t = threading.Thread(target=lambda: result.update(code=main(
        ["report", str(fifo), "--out", str(tmp_path / "b")])), daemon=True)
    t0 = time.monotonic()
    t.start()
    t.join(30)
    assert not t.is_alive() and result["code"] == 2  # refused without waiting for a writer
    assert time.monotonic() - t0 < 30
    big = tmp_path / "big.json"
    big.write_text('{"kind": "lots", "x": "' + "a" * 5000 + '"}')
    monkeypatch.setattr(run_record, "MAX_RECORD_BYTES", 1000)
    code, err = rebuild(big, tmp_path / "c", capsys)
    assert code == 2 and "a run record is at most" in err


def test_the_out_record_of_a_history_run_rebuilds(tmp_path, capsys, examples):
    """Was a TypeError: the --out record left out the posterior draws the figures need."""
    rows = [["A", "P-1", 125, 0], ["B", "P-1", 80, 1], ["C", "P-1", 200, 0],
            ["D", "P-1", 50, 2]]
    src = write_csv(tmp_path / "h.csv", ["Lot", "Part", "Inspected", "Defects"], rows)
    assert main(["lots", str(src), "--spec", "2%", "--prior", "history", "--out",
                 str(tmp_path / "ev")]) == 0
    code, err = rebuild(tmp_path / "ev" / "lot_decisions.json", tmp_path / "rep", capsys)
    assert code == 0, err
    assert (tmp_path / "rep" / "report.pdf").stat().st_size > 1000
