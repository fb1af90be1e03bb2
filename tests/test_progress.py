"""Progress on long work: shown on stderr to a person at a terminal (tested under a
pseudo-terminal), silent with --json, in CI and when stderr is not a terminal."""

import os
import pty
import re
import select
import subprocess
import sys
from pathlib import Path

import pytest
from helpers import write_csv

ROOT = Path(__file__).resolve().parents[1]


def _env(**extra) -> dict:
    env = {k: v for k, v in os.environ.items() if k != "CI"}
    env["PYTHONPATH"] = str(ROOT)
    env.update(extra)
    return env


def _run_with_tty_stderr(argv: list[str], env: dict, timeout: float = 120) -> tuple[str, str]:
    """Run ``argv`` with stderr on a pseudo-terminal; returns (stdout, what the terminal
    showed)."""
    master, slave = pty.openpty()
    proc = subprocess.Popen(argv, stdout=subprocess.PIPE, stderr=slave, env=env, cwd=ROOT)
    os.close(slave)
    shown = b""
    while True:
        ready, _, _ = select.select([master], [], [], timeout)
        if not ready:
            proc.kill()
            raise AssertionError("no end of output within the timeout")
        try:
            chunk = os.read(master, 4096)
        except OSError:  # the child closed the terminal
            break
        if not chunk:
            break
        shown += chunk
    out = proc.stdout.read().decode()
    proc.wait(timeout=timeout)
    os.close(master)
    return out, shown.decode(errors="replace")


@pytest.fixture(scope="module")
def lots_file(tmp_path_factory):
    folder = tmp_path_factory.mktemp("progress")
    return write_csv(folder / "lots.csv", ["Lot", "Inspected", "Defects"],
                     [["A", 125, 0], ["B", 80, 1]])


def _lots_argv(lots_file: Path, report: Path, *extra: str) -> list[str]:
    return [sys.executable, "-m", "qualbayes", "lots", str(lots_file), "--spec", "2%",
            "--report", str(report), *extra]


def test_report_building_progress_shows_at_a_terminal(lots_file, tmp_path):
    out, shown = _run_with_tty_stderr(_lots_argv(lots_file, tmp_path / "r"), _env())
    assert "qualbayes: building the report (figures, HTML, PDF)..." in shown
    assert "building the report (figures, HTML, PDF): done in" in shown
    assert "report written" in out  # the result itself stays on stdout


@pytest.mark.parametrize("case", ["json", "ci"])
def test_progress_is_silent_with_json_and_in_ci(lots_file, tmp_path, case):
    extra = ("--json",) if case == "json" else ()
    env = _env(CI="true") if case == "ci" else _env()
    _, shown = _run_with_tty_stderr(_lots_argv(lots_file, tmp_path / "r", *extra), env)
    assert "qualbayes:" not in shown


def test_progress_is_silent_when_stderr_is_not_a_terminal(lots_file, tmp_path):
    done = subprocess.run(_lots_argv(lots_file, tmp_path / "r"), capture_output=True,
                          text=True, env=_env(), cwd=ROOT, timeout=120)
    assert done.returncode == 0 and done.stderr == ""


SNIPPET = """
import sys
from qualbayes import progress
from qualbayes.inference.run import SamplerSettings
cache = sys.argv[1]
progress.compile_notice(cache)
progress.compile_notice(cache)  # said once per process
import time
n = progress.fit_started(SamplerSettings(num_warmup=10, num_samples=20))
time.sleep(2.5)  # the line shows the time elapsed while the sampler runs
progress.fit_finished(n)
progress.fit_checked(n, passed=True, retry=True)
for _ in progress.steps(range(3), "prior sensitivity"):
    pass
"""


def test_first_run_says_once_that_it_compiles_and_fits_are_reported(tmp_path):
    cold = tmp_path / "empty-cache"
    cold.mkdir()
    _, shown = _run_with_tty_stderr([sys.executable, "-c", SNIPPET, str(cold)], _env())
    assert shown.count("first run: compiling the sampler") == 1
    assert "later runs reuse the compiled code" in shown
    assert "sampling, fit 1: 4 chains x 30 iterations (0.0 s)" in shown
    ticks = re.findall(r"sampling, fit 1: 4 chains x 30 iterations \((\d\.\d) s\)", shown)
    assert len(ticks) >= 2 and float(ticks[-1]) >= 1.0  # redrawn as time passes
    assert "fit 1 done in" in shown and "sampler checks passed" in shown
    assert "prior sensitivity: 3 of 3 done" in shown
    warm = tmp_path / "warm-cache"
    warm.mkdir()
    (warm / "compiled-entry").write_bytes(b"x")
    _, shown = _run_with_tty_stderr([sys.executable, "-c", SNIPPET, str(warm)], _env())
    assert "first run" not in shown and "fit 1 done in" in shown
    # and nothing at all when stderr is a pipe
    done = subprocess.run([sys.executable, "-c", SNIPPET, str(cold)], capture_output=True,
                          text=True, env=_env(), cwd=ROOT, timeout=60)
    assert done.returncode == 0 and done.stderr == ""
