"""Nothing lost: a run killed while writing leaves the earlier evidence set intact, no half
file under a final name, no new file beside an old one, and the input unchanged.

The CLI runs in a subprocess started through a small wrapper that slows the writing down
(each part of the xlsx zip, or the swap of the finished folder into place, waits), so the
test can kill it at a known moment; a loop of kills at random moments checks the same
invariants without any slowing. Nothing in qualbayes itself knows about these tests.
"""

from __future__ import annotations

import hashlib
import json
import os
import random
import shutil
import signal
import subprocess
import sys
import time
import zipfile
from pathlib import Path

import pytest

from qualbayes.cli import main
from qualbayes.evidence.files import write_group
from qualbayes.evidence.output_set import MARKER

ROOT = Path(__file__).resolve().parent.parent
FINAL = ("lot_decisions.xlsx", "lot_decisions.json")

WRAPPER = r'''
import os, sys, time, zipfile
marker, mode, args = sys.argv[1], sys.argv[2], sys.argv[3:]

def note(tag):
    with open(marker, "a") as fh:
        fh.write(tag + "\n")

if mode == "slow-zip":  # every part of the workbook's zip waits after it is written
    for name in ("writestr", "write"):
        original = getattr(zipfile.ZipFile, name)
        def slow(self, *a, _original=original, **k):
            _original(self, *a, **k)
            self.fp.flush()
            note("part")
            time.sleep(0.4)
        setattr(zipfile.ZipFile, name, slow)
elif mode == "slow-swap":  # the complete staging folder waits before the swap into place
    import qualbayes.evidence.swap as swap
    for name in ("exchange", "rename_noreplace"):
        original = getattr(swap, name)
        def slow(a, b, _original=original):
            note("swap")
            time.sleep(60)
            return _original(a, b)
        setattr(swap, name, slow)
from qualbayes.cli import main
sys.exit(main(args))
'''


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture
def earlier_run(tmp_path, examples):
    """An input file and an --out folder holding a finished earlier run (spec 1%)."""
    src = tmp_path / "incoming.csv"
    shutil.copy(examples / "incoming_inspection.csv", src)
    out = tmp_path / "evidence"
    assert main(["lots", str(src), "--spec", "1%", "--out", str(out)]) == 0
    wrapper = tmp_path / "wrapper.py"
    wrapper.write_text(WRAPPER)
    state = {
        "src": src, "out": out, "wrapper": wrapper,
        "input": (digest(src), src.stat().st_mtime_ns),
        "earlier": {name: (out / name).read_bytes() for name in FINAL},
    }
    return state


def start(state, mode: str, marker: Path, args: list[str] | None = None) -> subprocess.Popen:
    args = args or ["lots", str(state["src"]), "--spec", "2%", "--out", str(state["out"]),
                    "--force"]
    env = {**os.environ, "CI": "true", "PYTHONPATH": str(ROOT)}
    return subprocess.Popen([sys.executable, str(state["wrapper"]), str(marker), mode, *args],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env, cwd=ROOT)


def wait_for(marker: Path, lines: int, proc: subprocess.Popen, timeout: float = 120) -> None:
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if marker.exists() and len(marker.read_text().splitlines()) >= lines:
            return
        if proc.poll() is not None:
            pytest.fail(f"the run ended before the moment to kill it: {proc.stderr.read()}")
        time.sleep(0.02)
    proc.kill()
    pytest.fail("the run never reached the moment to kill it")


def is_complete_new_run(out: Path) -> bool:
    """Both final files are a complete run with spec 2%: a valid xlsx and a JSON record."""
    record = json.loads((out / FINAL[1]).read_text(encoding="utf-8"))
    with zipfile.ZipFile(out / FINAL[0]) as zf:
        assert zf.testzip() is None
    from openpyxl import load_workbook

    wb = load_workbook(out / FINAL[0], read_only=True)
    try:
        assert wb.sheetnames
    finally:
        wb.close()
    return abs(record["question"]["spec"] - 0.02) < 1e-12


def leftovers(out: Path) -> list[Path]:
    """Staging folders beside the target (hidden, named after it)."""
    return sorted(out.parent.glob(f".{out.name}.qualbayes-*"))


def check_invariants(state) -> str:
    """Returns "earlier" or "new": the final files are the earlier run's, untouched, or a
    complete new run, both files the same run. The input is unchanged either way, and
    nothing but the set and its marker is ever inside the folder."""
    src, out = state["src"], state["out"]
    assert (digest(src), src.stat().st_mtime_ns) == state["input"]
    assert sorted(p.name for p in out.iterdir()) == sorted([*FINAL, MARKER])
    for p in out.parent.iterdir():  # anything else is a hidden staging folder
        if p.name.startswith(f".{out.name}."):
            assert ".qualbayes-partial-" in p.name or ".qualbayes-old-" in p.name, p.name
    same = [(out / name).read_bytes() == state["earlier"][name] for name in FINAL]
    if all(same):
        return "earlier"
    assert not any(same), "one file of the earlier run was replaced and the other not"
    assert is_complete_new_run(out)
    return "new"


def test_killed_in_the_middle_of_the_zip(earlier_run, tmp_path):
    marker = tmp_path / "marker"
    proc = start(earlier_run, "slow-zip", marker)
    wait_for(marker, 3, proc)  # three parts of the new workbook are in its temporary file
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=60)
    assert check_invariants(earlier_run) == "earlier"
    stage = leftovers(earlier_run["out"])
    assert len(stage) == 1  # SIGKILL cannot be caught: the half set stays, hidden beside
    book = stage[0] / FINAL[0]  # the target, and its workbook is indeed half a zip
    with pytest.raises(zipfile.BadZipFile):
        zipfile.ZipFile(book).testzip()
    # the next run cleans it (its process is gone) and writes its own set
    assert main(["lots", str(earlier_run["src"]), "--spec", "2%", "--out",
                 str(earlier_run["out"]), "--force"]) == 0
    assert leftovers(earlier_run["out"]) == []
    assert check_invariants(earlier_run) == "new"


def test_killed_before_the_swap(earlier_run, tmp_path):
    marker = tmp_path / "marker"
    proc = start(earlier_run, "slow-swap", marker)
    wait_for(marker, 1, proc)  # the new set is complete in its staging folder
    stage = leftovers(earlier_run["out"])
    assert len(stage) == 1
    assert sorted(p.name for p in stage[0].iterdir()) == sorted([*FINAL, MARKER])
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=60)
    assert check_invariants(earlier_run) == "earlier"


def test_terminated_run_removes_its_temporary_files(earlier_run, tmp_path):
    marker = tmp_path / "marker"
    proc = start(earlier_run, "slow-zip", marker)
    wait_for(marker, 3, proc)
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 130
    assert b"interrupted; no partial file was left" in err and b"Traceback" not in err
    assert check_invariants(earlier_run) == "earlier"
    assert leftovers(earlier_run["out"]) == []


def test_killed_at_random_moments(earlier_run, tmp_path):
    """No slowing: kill at random moments across a normal run's length; every outcome is
    the earlier run or the complete new one."""
    marker = tmp_path / "marker"
    t0 = time.monotonic()
    proc = start(earlier_run, "plain", marker)
    proc.communicate(timeout=300)
    length = time.monotonic() - t0
    assert proc.returncode == 0
    assert check_invariants(earlier_run) == "new"
    rng = random.Random(20261202)
    outcomes = []
    for _ in range(6):
        for name in FINAL:  # put the earlier run back
            (earlier_run["out"] / name).write_bytes(earlier_run["earlier"][name])
        proc = start(earlier_run, "plain", marker)
        time.sleep(rng.uniform(0.3, 1.1) * length)
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=60)
        outcomes.append(check_invariants(earlier_run))
    assert set(outcomes) <= {"earlier", "new"}, outcomes


def test_failure_writing_the_record_leaves_the_earlier_workbook(tmp_path):
    """The pair is one group: if the second file cannot be written, the first is not
    renamed into place either (per-file writes would have replaced the workbook)."""
    book, record = tmp_path / "a.xlsx", tmp_path / "a.json"
    book.write_bytes(b"earlier workbook")
    record.write_text("earlier record")

    def broken(path):
        path.write_text("half")
        raise OSError(28, "No space left on device")

    with pytest.raises(OSError, match="No space left"):
        write_group([(book, lambda p: p.write_bytes(b"new workbook")), (record, broken)],
                    force=True)
    assert book.read_bytes() == b"earlier workbook"
    assert record.read_text() == "earlier record"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.json", "a.xlsx"]


def test_output_error_exits_2_without_traceback(tmp_path, capsys, examples, monkeypatch):
    out = tmp_path / "ev"

    def no_space(*args, **kwargs):
        raise OSError(28, "No space left on device")

    import qualbayes.evidence.workbook as workbook

    monkeypatch.setattr(workbook, "workbook_writer", lambda sheets: no_space)
    code = main(["lots", str(examples / "incoming_inspection.csv"), "--spec", "1%",
                 "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and "cannot write the output" in err and "No space left" in err
    assert not out.exists() or not list(out.iterdir())
    assert leftovers(out) == []


@pytest.mark.parametrize("how", ["same name", "hard link", "symlink"])
def test_the_input_is_never_written_over(tmp_path, examples, capsys, how):
    """A folder holding an input (or a link to one) is refused, whatever --force says."""
    out = tmp_path / "ev"
    out.mkdir()
    original = examples / "incoming_inspection.xlsx"
    if how == "same name":
        src = out / FINAL[0]
        shutil.copy(original, src)
    else:
        src = tmp_path / "incoming.xlsx"
        shutil.copy(original, src)
        (os.link if how == "hard link" else os.symlink)(src, out / FINAL[0])
    before = (digest(src), src.stat().st_mtime_ns)
    code = main(["lots", str(src), "--spec", "1%", "--out", str(out), "--force"])
    err = capsys.readouterr().err
    assert code == 3 and "an input file of this run; it is never overwritten" in err
    assert (digest(src), src.stat().st_mtime_ns) == before
    assert not (out / FINAL[1]).exists()


def _set_of(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in folder.iterdir() if p.is_file()}


@pytest.mark.parametrize("command,mode,lines", [
    ("plan", "slow-zip", 3), ("plan", "slow-swap", 1), ("life", "slow-swap", 1),
    pytest.param("life", "slow-zip", 3, marks=pytest.mark.slow)])
def test_a_killed_life_or_plan_run_never_leaves_a_new_file_beside_an_old_one(
        tmp_path, examples, command, mode, lines):
    """Issue 13 item 5: every command writes through the one pipeline, so a life run and a
    plan run killed while writing leave the earlier set whole (no new file beside an old
    one) and nothing under a final name that is not complete."""
    out = tmp_path / "evidence"
    if command == "life":
        src = tmp_path / "rig.csv"
        shutil.copy(examples / "sv30_rig_test.csv", src)
        first = ["life", str(src), "--mission", "5000", "--target", "0.9", "--out", str(out)]
        second = ["life", str(src), "--mission", "4000", "--target", "0.9", "--out", str(out),
                  "--force"]
    else:
        src = None
        first = ["plan", "mtbf", "--mtbf", "600", "--confidence", "0.8", "--out", str(out)]
        second = ["plan", "mtbf", "--mtbf", "900", "--confidence", "0.8", "--out", str(out),
                  "--force"]
    assert main(first) == 0
    earlier = _set_of(out)
    wrapper = tmp_path / "wrapper.py"
    wrapper.write_text(WRAPPER)
    marker = tmp_path / "marker"
    proc = start({"wrapper": wrapper}, mode, marker, second)
    wait_for(marker, lines, proc)
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=60)
    assert _set_of(out) == earlier  # every file the earlier run's, none added or replaced
    if src is not None:
        assert src.read_bytes() == (examples / "sv30_rig_test.csv").read_bytes()
    assert len(leftovers(out)) == 1  # the dead run's staging folder, hidden beside
    assert main(second) == 0  # the next run cleans it and replaces the set whole
    assert leftovers(out) == []
    after = _set_of(out)
    assert after.keys() == earlier.keys() and all(after[k] != earlier[k] for k in after
                                                  if k != MARKER and not k.endswith(".png"))


@pytest.mark.parametrize("case", ["mission far beyond the data", "times of 1e-300"])
def test_no_crash_after_a_write_has_begun(tmp_path, examples, case):
    """Every check and all computation come before the first byte is written, so a run that
    fails late leaves nothing; with constant draws (R(mission) saturated at every draw) the
    command must end with an answer or exit 2, and never a traceback."""
    if case == "times of 1e-300":
        src = write_life(tmp_path / "tiny.csv", ["1e-300", "2e-300", "1.5e-300"], "3e-300")
        args = ["life", str(src), "--mission", "1e-300", "--target", "0.9"]
    else:
        args = ["life", str(examples / "sv30_rig_test.csv"), "--mission", "1000000",
                "--target", "0.9", "--shape-prior", "2,4"]
    out, rep = tmp_path / "ev", tmp_path / "rep"
    env = {**os.environ, "CI": "true", "PYTHONPATH": str(ROOT)}
    proc = subprocess.run([sys.executable, "-m", "qualbayes", *args, "--out", str(out),
                           "--report", str(rep)], capture_output=True, text=True, env=env,
                          cwd=ROOT, timeout=600)
    assert "Traceback" not in proc.stderr
    for folder in (out, rep):  # absent, or a complete set
        if folder.exists():
            listed = json.loads((folder / MARKER).read_text())["files"]
            assert sorted(str(p.relative_to(folder)) for p in folder.rglob("*")
                          if p.is_file() and p.name != MARKER) == sorted(listed)
    assert not list(tmp_path.glob(".*.qualbayes-*"))
    if proc.returncode == 70 and case == "mission far beyond the data":
        pytest.xfail("needs the gate to judge the parameters rather than a saturated "
                     "R(mission) (gate.py, another engineer's part of issue 12)")
    assert proc.returncode in (0, 2), proc.stderr


def write_life(path: Path, failures: list[str], suspension: str) -> Path:
    rows = [f"U{i},{t},F" for i, t in enumerate(failures, 1)]
    path.write_text("Unit,Hours,Status\n" + "\n".join(rows) + f"\nS1,{suspension},S\n")
    return path
