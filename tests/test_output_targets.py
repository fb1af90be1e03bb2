"""Output targets that can never destroy data (issue 12, items 1 and 6).

Every "--force deletes a folder" case runs in a temporary folder with a canary file that must
survive, byte for byte. A folder is replaced only when it holds nothing but an earlier set of
this tool (its marker file lists every file) and no input of the run.
"""

from __future__ import annotations

import json
import os
import shutil
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest
from helpers import write_csv

import qualbayes.evidence.swap as swap
from qualbayes.cli import main
from qualbayes.evidence.output_set import MARKER, clean_leftovers, inspect, write_set

ROOT = Path(__file__).resolve().parent.parent
HEADER = ["Lot", "Inspected", "Defects"]
ROWS = [["A", 125, 0], ["B", 80, 1], ["C", 200, 0]]
CANARY = b"field notes, not from qualbayes\n"


def lots(src: Path, *extra: str) -> list[str]:
    return ["lots", str(src), "--spec", "2%", *extra]


def canary(folder: Path) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    p = folder / "notes.txt"
    p.write_bytes(CANARY)
    return p


@pytest.fixture
def src(tmp_path) -> Path:
    return write_csv(tmp_path / "in.csv", HEADER, ROWS)


@pytest.mark.parametrize("option", ["--report", "--out"])
def test_force_never_replaces_the_folder_holding_the_input(tmp_path, capsys, option):
    data = tmp_path / "data"
    data.mkdir()
    src = write_csv(data / "in.csv", HEADER, ROWS)
    note = canary(data)
    before = src.read_bytes()
    assert main(lots(src, option, str(data), "--force")) == 3
    err = capsys.readouterr().err
    assert "an input file of this run" in err and "whatever --force says" in err
    assert note.read_bytes() == CANARY and src.read_bytes() == before
    assert sorted(p.name for p in data.iterdir()) == ["in.csv", "notes.txt"]


@pytest.mark.parametrize("option", ["--report", "--out"])
def test_force_never_replaces_a_folder_of_other_files(tmp_path, src, capsys, option):
    folder = tmp_path / "shared"
    note = canary(folder)
    (folder / "sub").mkdir()
    (folder / "sub" / "deep.txt").write_text("x")
    assert main(lots(src, option, str(folder), "--force")) == 3
    err = capsys.readouterr().err
    assert "not made by qualbayes" in err and "notes.txt" in err and "sub" in err
    assert note.read_bytes() == CANARY and (folder / "sub" / "deep.txt").read_text() == "x"


def test_a_report_target_that_is_the_input_file_is_refused(tmp_path, src, capsys):
    before = src.read_bytes()
    assert main(lots(src, "--report", str(src), "--force")) == 3
    assert "an input file of this run" in capsys.readouterr().err
    assert src.read_bytes() == before and src.is_file()
    other = tmp_path / "other.txt"
    other.write_bytes(CANARY)
    assert main(lots(src, "--report", str(other), "--force")) == 3
    assert "it is a file, not a folder" in capsys.readouterr().err
    assert other.read_bytes() == CANARY


def test_devices_fifos_sockets_and_links_are_never_followed(tmp_path, src, capsys):
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    sock_path = tmp_path / "sock"
    sock = socket.socket(socket.AF_UNIX)
    sock.bind(str(sock_path))
    real = tmp_path / "real"
    note = canary(real)
    link = tmp_path / "link"
    link.symlink_to(real, target_is_directory=True)
    try:
        for target, words in ((fifo, "FIFO"), (sock_path, "socket"), (link, "symbolic link"),
                              (Path("/dev/null"), "character device")):
            t0 = time.monotonic()
            assert main(lots(src, "--report", str(target), "--force")) == 3, target
            assert words in capsys.readouterr().err
            assert time.monotonic() - t0 < 30  # refused, not opened (a FIFO would block)
        assert fifo.is_fifo() and sock_path.is_socket() and link.is_symlink()
        assert Path("/dev/null").is_char_device()
        assert note.read_bytes() == CANARY
    finally:
        sock.close()


def test_report_rebuild_never_replaces_a_foreign_folder(tmp_path, src, capsys):
    rep = tmp_path / "rep"
    assert main(lots(src, "--report", str(rep))) == 0
    folder = tmp_path / "elsewhere"
    note = canary(folder)
    assert main(["report", str(rep / "run.json"), "--out", str(folder), "--force"]) == 3
    assert note.read_bytes() == CANARY
    capsys.readouterr()


def test_earlier_data_and_history_files_are_protected(tmp_path, src, capsys, examples):
    old = tmp_path / "old"
    assert main(lots(src, "--out", str(old))) == 0
    earlier = old / "earlier.csv"  # an input placed inside an earlier evidence set
    write_csv(earlier, HEADER, ROWS)
    marker = json.loads((old / MARKER).read_text())
    marker["files"].append("earlier.csv")  # even if listed in the marker
    (old / MARKER).write_text(json.dumps(marker))
    assert main(lots(src, "--earlier", str(earlier), "--earlier-weight", "0.5", "--out",
                     str(old), "--force")) == 3
    assert "earlier.csv, an input file of this run" in capsys.readouterr().err
    assert earlier.exists()
    hist = tmp_path / "hist"
    hist.mkdir()
    history = write_csv(hist / "lots.csv", ["Lot", "Part", "Inspected", "Defects"],
                        [["A", "P", 50, 0], ["B", "P", 50, 1]])
    assert main(["plan", "sampling", "--aql", "1%", "--ltpd", "5%", "--history",
                 str(history), "--report", str(hist), "--force"]) == 3
    assert "an input file of this run" in capsys.readouterr().err
    assert history.exists()


def test_a_set_with_a_file_added_by_hand_is_not_replaced(tmp_path, src, capsys):
    out = tmp_path / "ev"
    assert main(lots(src, "--out", str(out))) == 0
    note = canary(out)
    assert main(lots(src, "--out", str(out), "--force")) == 3
    assert "other files were added: notes.txt" in capsys.readouterr().err
    assert note.read_bytes() == CANARY


def test_force_rerun_leaves_no_stale_file(tmp_path, examples, capsys):
    out = tmp_path / "ev"
    rig = str(examples / "sv30_rig_test.csv")
    base = ["life", rig, "--mission", "5000", "--target", "0.9", "--out", str(out)]
    assert main(base) == 0
    figures = sorted(p.name for p in out.glob("*.png"))
    assert any("Rev_C" in f for f in figures) and any("Rev_B" in f for f in figures)
    assert main([*base, "--group", "Rev B", "--force"]) == 0
    assert not list(out.glob("*Rev_C*"))  # the earlier run's figures are gone
    assert sorted(p.name for p in out.iterdir()) == sorted(
        json.loads((out / MARKER).read_text())["files"] + [MARKER])
    capsys.readouterr()


def test_unwritable_place_is_refused_before_any_computation(tmp_path, src, capsys,
                                                            monkeypatch):
    import qualbayes.lot_question as acceptance

    def never(*a, **k):
        raise AssertionError("computed before the targets were checked")

    monkeypatch.setattr(acceptance, "assess_lots", never)
    blocker = tmp_path / "a_file"
    blocker.write_text("x")
    assert main(lots(src, "--report", str(blocker / "rep"))) == 2
    assert "is a file, not a folder" in capsys.readouterr().err
    taken = tmp_path / "taken"
    canary(taken)
    assert main(lots(src, "--out", str(taken))) == 3
    capsys.readouterr()


def test_out_and_report_must_be_separate(tmp_path, src, capsys):
    assert main(lots(src, "--out", str(tmp_path / "x"), "--report", str(tmp_path / "x"))) == 2
    assert main(lots(src, "--out", str(tmp_path / "x"), "--report",
                     str(tmp_path / "x" / "r"))) == 2
    assert "two separate folders" in capsys.readouterr().err


def test_swap_without_renameat2_keeps_the_old_set_until_the_new_is_complete(
        tmp_path, monkeypatch):
    folder = tmp_path / "set"
    write_set(folder, {"a.txt": lambda p: p.write_text("old")}, force=False)
    monkeypatch.setattr(swap, "exchange", lambda a, b: False)  # an OS without it

    def broken(p):
        raise OSError(28, "No space left on device")

    with pytest.raises(OSError):
        write_set(folder, {"a.txt": lambda p: p.write_text("new"), "b.txt": broken},
                  force=True)
    assert (folder / "a.txt").read_text() == "old"
    write_set(folder, {"b.txt": lambda p: p.write_text("new")}, force=True)
    assert sorted(p.name for p in folder.iterdir()) == [MARKER, "b.txt"]
    assert [p.name for p in tmp_path.iterdir()] == ["set"]


def test_leftovers_of_dead_runs_only_are_cleaned(tmp_path):
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True).stdout.strip()
    ours = tmp_path / f".rep.qualbayes-partial-{dead}-abc"
    ours.mkdir()
    (ours / MARKER).write_text(json.dumps({"tool": "qualbayes", "state": "partial",
                                           "pid": int(dead), "files": []}))
    (ours / "report.html").write_text("half")
    alive = tmp_path / f".rep.qualbayes-partial-{os.getpid()}-abc"
    alive.mkdir()
    (alive / MARKER).write_text(json.dumps({"tool": "qualbayes", "state": "partial",
                                            "pid": os.getpid(), "files": []}))
    stranger = tmp_path / f".rep.qualbayes-partial-{dead}-xyz"  # same name, no marker
    canary(stranger)
    old = tmp_path / f".rep.qualbayes-old-{dead}-q"  # a fallback swap cut between renames
    old.mkdir()
    (old / "run.json").write_text("{}")
    (old / MARKER).write_text(json.dumps({"tool": "qualbayes", "state": "complete",
                                          "pid": 1, "files": ["run.json"]}))
    cleaned = clean_leftovers(tmp_path)
    assert ours in cleaned and not ours.exists()
    assert alive.exists() and (stranger / "notes.txt").read_bytes() == CANARY
    assert (tmp_path / "rep" / "run.json").read_text() == "{}"  # put back where it was
    assert inspect(tmp_path / "rep").state == "ours"


def test_two_runs_at_once_leave_one_whole_set(tmp_path, src):
    """Two --out --force runs into the same folder at once: each set is written whole under
    the lock, so the workbook and the record always belong to the same run."""
    out = tmp_path / "ev"
    env = {**os.environ, "CI": "true", "PYTHONPATH": str(ROOT)}
    procs = [subprocess.Popen([sys.executable, "-m", "qualbayes", "lots", str(src), "--spec",
                               spec, "--out", str(out), "--force"], env=env, cwd=ROOT,
                              stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
             for spec in ("1%", "3%")]
    for p in procs:
        _, err = p.communicate(timeout=300)
        assert p.returncode == 0, err
    record = json.loads((out / "lot_decisions.json").read_text())
    from openpyxl import load_workbook

    wb = load_workbook(out / "lot_decisions.xlsx", read_only=True)
    try:
        model = {r[0]: r[1] for r in wb["Model and prior"].iter_rows(values_only=True)}
    finally:
        wb.close()
    assert model["spec limit"] == record["question"]["spec"]
    marker = json.loads((out / MARKER).read_text())
    assert marker["report_id"] == record["report_id"]
    assert not list(tmp_path.glob(".ev.qualbayes-*"))


def test_write_set_refuses_names_outside_the_folder(tmp_path):
    for bad in ("../x", "/etc/x", "a/../../x", MARKER, ""):
        with pytest.raises(ValueError):
            write_set(tmp_path / "s", {bad: lambda p: p.write_text("x")}, force=False)
    assert not (tmp_path / "s").exists()
    shutil.rmtree(tmp_path / "s", ignore_errors=True)
