"""``at-use`` and ``returns`` through the command pipeline: one run of each (module-scoped)
writes the JSON document, the --out evidence set and the --report folder; the tests check
the stamp, the marker files, the refusals (exit 3, nothing touched), the rebuild of the
report from its run record and the refusal of an edited record."""

from __future__ import annotations

import contextlib
import io
import json
from pathlib import Path

import numpy as np
import pytest

from qualbayes.evidence.output_set import MARKER
from tests.helpers import write_csv
from tests.test_accelerated import motor_csv

CANARY = b"engineer's notes, not made by qualbayes\n"
STAMP = ("schema_version", "created_utc", "report_id", "tool_version", "analyst", "digest")
REPORT_FILES = {MARKER, "report.html", "report.pdf", "evidence.xlsx", "run.json", "figures"}


def _fleet(path: Path) -> Path:
    rng = np.random.default_rng(1)
    return write_csv(path, ["Serial", "Hours", "Region"],
                     [[f"U{i}", round(float(rng.uniform(0, 5000)), 1), ["N", "S"][i % 2]]
                      for i in range(400)])


def _argv(command: str, folder: Path) -> list[str]:
    if command == "at-use":
        f = motor_csv(folder / "motor.csv")
        return ["at-use", str(f), "--stress-column", "Temp (C)", "--relation", "arrhenius",
                "--use", "130C", "--mission", "10000", "--target", "0.9", "--distribution",
                "lognormal"]
    life = Path(__file__).resolve().parent.parent / "example_lots" / "sv30_rig_test.csv"
    return ["returns", str(_fleet(folder / "fleet.csv")), "--life", str(life),
            "--life-group", "Rev C", "--usage", "250", "--horizon", "6", "--spares", "20"]


EVIDENCE = {"at-use": {"at_use_results.xlsx", "at_use_results.json", "at_use_life_stress.png"},
            "returns": {"returns_forecast.xlsx", "returns_forecast.json",
                        "returns_forecast.png", "returns_forecast_1.png",
                        "returns_forecast_2.png"}}


@pytest.fixture(scope="module", params=["at-use", "returns"])
def run(request, tmp_path_factory):
    """One run: --json, --out and --report together, with an analyst."""
    from qualbayes.cli import main

    folder = tmp_path_factory.mktemp(request.param.replace("-", "_"))
    argv = _argv(request.param, folder)
    full = [*argv, "--json", "--out", str(folder / "out"), "--report", str(folder / "rep"),
            "--analyst", "R. Quinn"]
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert main(full) == 0
    return {"command": request.param, "argv": argv, "full": full, "folder": folder,
            "doc": json.loads(out.getvalue())}


def test_json_carries_the_stamp_and_the_answer(run):
    doc = run["doc"]
    assert set(STAMP) <= set(doc) and doc["analyst"] == "R. Quinn"
    assert doc["report_id"].startswith("QB-") and doc["created_utc"].endswith("Z")
    assert doc["kind"] == run["command"] and "CAUTION" in doc["caution"]
    if run["command"] == "at-use":
        r = doc["result"]
        assert r["diagnostics"]["passed"]
        assert r["decision"] in ("meets", "does-not-meet", "undecided", "too-close-to-call")
        assert {"prob_meets_target", "prob_meets_target_mc_error", "b10_at_use",
                "levels", "shape_check", "extrapolation"} <= set(r)
    else:
        fc = doc["forecast"]
        assert doc["life"]["diagnostics"]["passed"]
        assert [g["group"] for g in fc["groups"]] == ["N", "S"]
        assert len(fc["overall"]["periods"]) == 6 and "spares" in fc["overall"]
        assert 0 <= fc["overall"]["spares"]["prob_enough_mc_error"] < 0.05


def test_out_and_report_are_marker_carrying_sets(run):
    out, rep = run["folder"] / "out", run["folder"] / "rep"
    assert {p.name for p in out.iterdir()} == EVIDENCE[run["command"]] | {MARKER}
    assert {p.name for p in rep.iterdir()} == REPORT_FILES
    for folder, kind in ((out, "evidence"), (rep, "report")):
        marker = json.loads((folder / MARKER).read_text())
        assert marker["tool"] == "qualbayes" and marker["kind"] == kind
        assert marker["state"] == "complete" and marker["report_id"] == run["doc"]["report_id"]
    html = (rep / "report.html").read_text()
    assert "decision support only" in html.lower() and "R. Quinn" in html
    assert (rep / "report.pdf").read_bytes().startswith(b"%PDF")


def test_an_earlier_set_is_not_overwritten_without_force(run, capsys):
    from qualbayes.cli import main

    out = run["folder"] / "out"
    before = {p.name: p.stat().st_mtime_ns for p in out.iterdir()}
    assert main([*run["argv"], "--out", str(out)]) == 3  # refused before any work
    assert "--force" in capsys.readouterr().err
    assert {p.name: p.stat().st_mtime_ns for p in out.iterdir()} == before


@pytest.mark.parametrize("option", ["--out", "--report"])
def test_force_never_replaces_a_foreign_folder(run, tmp_path, capsys, option):
    from qualbayes.cli import main

    folder = tmp_path / "shared"
    folder.mkdir()
    (folder / "notes.txt").write_bytes(CANARY)
    assert main([*run["argv"], option, str(folder), "--force"]) == 3
    assert "not made by qualbayes" in capsys.readouterr().err
    assert sorted(p.name for p in folder.iterdir()) == ["notes.txt"]
    assert (folder / "notes.txt").read_bytes() == CANARY


@pytest.mark.parametrize("source", ["rep/run.json", "out"])
def test_report_rebuilds_from_the_run_record(run, tmp_path, capsys, source):
    from qualbayes.cli import main

    record = run["folder"] / source
    if source == "out":
        record = next(p for p in record.iterdir() if p.suffix == ".json" and p.name != MARKER)
    assert main(["report", str(record), "--out", str(tmp_path / "again")]) == 0
    assert "report rebuilt" in capsys.readouterr().out
    assert {p.name for p in (tmp_path / "again").iterdir()} == REPORT_FILES
    original = (run["folder"] / "rep" / "report.html").read_text()
    again = (tmp_path / "again" / "report.html").read_text()
    assert again.count("<table") == original.count("<table")


def _edited(run, tmp_path, edit, reseal: bool) -> Path:
    from qualbayes.evidence.run_record import seal

    record = json.loads((run["folder"] / "rep" / "run.json").read_text())
    edit(record)
    if reseal:  # as if the digest were recomputed after the edit
        record = seal(record)
    path = tmp_path / "edited.json"
    path.write_text(json.dumps(record), encoding="utf-8")
    return path


def _flip(record: dict) -> None:
    if record["kind"] == "at-use":
        record["result"]["decision"] = ("does-not-meet" if record["result"]["decision"]
                                        == "meets" else "meets")
    else:
        record["forecast"]["overall"]["total"]["median"] += 5


def test_a_hand_edited_record_is_refused(run, tmp_path, capsys):
    from qualbayes.cli import main

    path = _edited(run, tmp_path, _flip, reseal=False)
    assert main(["report", str(path), "--out", str(tmp_path / "r")]) == 2
    err = capsys.readouterr().err
    assert "digest does not match" in err
    assert ("'result'" in err) if run["command"] == "at-use" else ("'forecast'" in err)
    assert not (tmp_path / "r").exists()


def test_a_resealed_record_must_still_agree_with_its_verdict(run, tmp_path, capsys):
    """The digest is not a signature: a record resealed after an edit is caught by the
    recomputed verdict (at-use) or by a forecast that the failed gate forbids (returns)."""
    from qualbayes.cli import main

    def edit(record):
        if record["kind"] == "at-use":
            _flip(record)
        else:
            record["life"]["diagnostics"]["passed"] = False

    path = _edited(run, tmp_path, edit, reseal=True)
    assert main(["report", str(path), "--out", str(tmp_path / "r")]) == 2
    err = capsys.readouterr().err
    assert "The record was altered" in err
    assert not (tmp_path / "r").exists()


@pytest.mark.parametrize("command", ["at-use", "returns"])
def test_help_states_each_default_once_and_the_pipeline_options(command):
    import re

    from qualbayes.cli import build_parser

    sub = build_parser()._subparsers._group_actions[0].choices[command]
    text = " ".join(sub.format_help().split())
    for option in re.split(r"\s(?=--[a-z])", text):
        assert option.count("default") <= 1, option
    assert {"--report DIR", "--analyst NAME", "--force", "--json"} <= set(
        re.findall(r"--[a-z]+(?: [A-Z]+)?", text))
    assert "inspected=" not in text  # the column example fits the file


def test_a_failed_gate_record_rebuilds_with_no_answer(run, tmp_path, capsys):
    """A record whose gate failed (as the command writes it: no decision, no forecast)
    rebuilds a report that says so at the top and shows no numbers to act on."""
    from qualbayes.cli import main

    def fail(record):
        if record["kind"] == "at-use":
            r = record["result"]
            r["diagnostics"]["passed"] = False
            r.update(decision="not-converged", prob_meets_target=None,
                     prob_meets_target_mc_error=None)
            for key in ("levels", "coefficients", "curve", "reliability_at_mission"):
                r.pop(key, None)
        else:
            record["life"]["diagnostics"]["passed"] = False
            record["forecast"] = None

    path = _edited(run, tmp_path, fail, reseal=True)
    assert main(["report", str(path), "--out", str(tmp_path / "r")]) == 0
    capsys.readouterr()
    html = (tmp_path / "r" / "report.html").read_text()
    assert "CONVERGENCE GATE FAILED" in html and "decision support only" in html.lower()
    assert not list((tmp_path / "r" / "figures").glob("*.png"))


def test_force_never_replaces_the_folder_holding_the_life_data(tmp_path, capsys):
    """The life data of 'returns' are an input too: refused before any work."""
    from qualbayes.cli import main

    argv = _argv("returns", tmp_path)
    data = tmp_path / "data"
    data.mkdir()
    life = data / "life.csv"
    life.write_bytes(Path(argv[3]).read_bytes())
    argv[3] = str(life)
    assert main([*argv, "--out", str(data), "--force"]) == 3
    assert "an input file of this run" in capsys.readouterr().err
    assert sorted(p.name for p in data.iterdir()) == ["life.csv"]
