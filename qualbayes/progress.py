"""Progress on long work, written to stderr for a person at a terminal, and only there.

Silent when stderr is not a terminal (a pipe, a file, a test's capture), when the ``CI``
environment variable is set, and under ``--json`` (the command line calls :func:`quiet`).
Nothing here changes a number: it only reports what is being done and how long it took.

>>> with task("example", total=2) as t:   # silent here: doctest's stderr is no terminal
...     t.advance()
...     t.advance()
"""

from __future__ import annotations

import os
import sys
import time
from collections.abc import Iterable, Iterator
from pathlib import Path

_QUIET = False
_SAID: set[str] = set()
_FITS = 0


def quiet(flag: bool = True) -> None:
    """Silence (or allow again) every progress display of this process."""
    global _QUIET
    _QUIET = bool(flag)


def enabled() -> bool:
    """True only for a person at a terminal: stderr is a tty, not CI, not --json."""
    if _QUIET or os.environ.get("CI"):
        return False
    try:
        return sys.stderr.isatty()
    except (AttributeError, ValueError):  # replaced or closed stream
        return False


def _write(text: str) -> None:
    sys.stderr.write(text)
    sys.stderr.flush()


def say(text: str) -> None:
    """One line of progress (``qualbayes: ...``) when enabled."""
    if enabled():
        _write(f"qualbayes: {text}\n")


def say_once(key: str, text: str) -> None:
    """:func:`say`, at most once per process for ``key``."""
    if key not in _SAID and enabled():
        _SAID.add(key)
        say(text)


def _elapsed(seconds: float) -> str:
    return f"{seconds:.1f} s" if seconds < 60 else f"{int(seconds // 60)} min {seconds % 60:.0f} s"


class Task:
    """Progress of one piece of work, a line per step (lines, not a bar redrawn in place, so
    that the sampler's own bars and other messages never garble it). Use :func:`task`."""

    def __init__(self, label: str, total: int | None = None):
        self.label, self.total, self.done = label, total, 0
        self.start = time.monotonic()
        self.on = enabled()

    def _since(self) -> str:
        return _elapsed(time.monotonic() - self.start)

    def advance(self, n: int = 1) -> None:
        self.done += n
        if self.on and self.total:
            _write(f"qualbayes: {self.label}: {self.done:,} of {self.total:,} done "
                   f"({self._since()})\n")

    def __enter__(self) -> Task:
        if self.on:
            _write(f"qualbayes: {self.label}...\n")
        return self

    def __exit__(self, kind, value, tb) -> None:
        if self.on and not (self.total and self.done == self.total and kind is None):
            _write(f"qualbayes: {self.label}: {'done' if kind is None else 'stopped'} "
                   f"in {self._since()}\n")


def task(label: str, total: int | None = None) -> Task:
    return Task(label, total)


def steps(items: Iterable, label: str) -> Iterator:
    """Iterate over ``items`` showing ``label: k of n``."""
    items = list(items)
    with task(label, len(items)) as t:
        for item in items:
            yield item
            t.advance()


def cache_is_cold(cache_dir: str | os.PathLike | None) -> bool:
    """True when the compiled-code cache holds nothing yet (a first run compiles)."""
    if not cache_dir or str(cache_dir).lower() == "off":
        return True
    path = Path(cache_dir)
    try:
        return not path.is_dir() or not any(path.iterdir())
    except OSError:
        return True


def compile_notice(cache_dir: str | os.PathLike | None) -> None:
    """Say once, on a first run (empty cache), that the sampler is being compiled."""
    if cache_is_cold(cache_dir):
        say_once("compile", "first run: compiling the sampler, which can take a minute or "
                 "two; later runs reuse the compiled code and start much faster")


class _Ticker:
    """A line redrawn in place once a second with the time elapsed (a thread), for work that
    reports no steps of its own, such as one sampler run."""

    def __init__(self, text: str):
        import threading  # noqa: PLC0415

        self.base = self.text = text
        self.start, self.seconds = time.monotonic(), 0.0
        self.stop = threading.Event()
        self.thread = threading.Thread(target=self._run, daemon=True)
        self.thread.start()

    def _draw(self) -> None:
        _write(f"\r\x1b[Kqualbayes: {self.text} ({_elapsed(time.monotonic() - self.start)})")

    def _run(self) -> None:
        self._draw()
        while not self.stop.wait(1.0):
            self._draw()

    def close(self) -> float:
        self.stop.set()
        self.thread.join()
        _write("\r\x1b[K")
        return time.monotonic() - self.start


def fit_started(settings, what: str | None = None) -> tuple[int, _Ticker | None]:
    """Show that one NUTS fit runs, with its time elapsed; ``what``: words put before the
    chains (e.g. ``"more draws for close calls, 12 parts"``); returns what
    :func:`fit_finished` needs."""
    global _FITS
    _FITS += 1
    iterations = settings.num_warmup + settings.num_samples
    text = (f"sampling, fit {_FITS}: {what + ', ' if what else ''}{settings.num_chains} "
            f"chains x {iterations:,} iterations")
    return _FITS, (_Ticker(text) if enabled() else None)


def fit_step(started: tuple[int, _Ticker | None], done: int, total: int, unit: str) -> None:
    """Add ``done of total unit`` to the running fit's line (e.g. the parts sampled)."""
    ticker = started[1]
    if ticker is not None:
        ticker.text = f"{ticker.base} [{done:,} of {total:,} {unit}]"


def fit_finished(started: tuple[int, _Ticker | None]) -> None:
    """Stop the fit's line (always called, also when sampling is interrupted)."""
    if started[1] is not None and not started[1].stop.is_set():
        started[1].seconds = started[1].close()


def fit_checked(started: tuple[int, _Ticker | None], passed: bool, retry: bool) -> None:
    """Say how long the fit took and what the sampler checks found."""
    number, ticker = started
    if ticker is None:
        return
    fit_finished(started)
    outcome = "sampler checks passed" if passed else (
        "sampler checks failed, retrying once with twice the draws" if retry
        else "sampler checks failed")
    say(f"sampling, fit {number} done in {_elapsed(ticker.seconds)}: {outcome}")
