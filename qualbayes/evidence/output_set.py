"""Output folders that can never destroy data.

Every folder this tool writes (an ``--out`` evidence set, a ``--report`` folder) carries a
marker file, ``.qualbayes-output.json``, listing the files of the set. A target folder is

* absent or empty: written;
* a set of this tool (marker present, nothing in it but the files the marker lists, no input
  of the run): replaced with ``--force``, refused without it (exit 3);
* anything else (a folder with other files, a file, a symbolic link, a device, FIFO or
  socket, a folder holding an input of the run): refused whatever ``--force`` says (exit 3),
  with a message saying what is there.

The new set is written completely into a hidden staging folder beside the target, then put in
place in one step: ``renameat2(RENAME_NOREPLACE)`` when nothing is there, ``RENAME_EXCHANGE``
when an earlier set is replaced (where the OS lacks it: two renames with termination signals
held, and the old set stays until the new one is complete). The whole write holds an advisory
lock on the parent folder. The earlier set, now under the staging name, is removed file by
file from its marker's list, so a ``--force`` rerun leaves no stale file. Staging folders of
runs that died (their process is gone) are cleaned at the next write into the same place.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import json
import os
import re
import shutil
import stat
import sys
import tempfile
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

from qualbayes.errors import OptionError, OutputExistsError
from qualbayes.evidence import swap
from qualbayes.evidence.files import inputs_inside, is_input, public_mode

MARKER = ".qualbayes-output.json"
MAX_MARKER_BYTES = 1 << 20
#: A folder with more entries than this is not a set of this tool; the walk stops there.
MAX_ENTRIES = 5000
_LEFTOVER = re.compile(r"^\.(?P<name>.+)\.qualbayes-(?P<what>partial|old)-(?P<pid>\d+)-\w+$")

Writer = Callable[[Path], None]


@dataclass
class Inspection:
    """What is at a target path. ``state``: absent, empty, ours, foreign or other."""

    path: Path
    state: str
    what: str = ""
    marker: dict = field(default_factory=dict)
    files: list[str] = field(default_factory=list)


def _kind_of(mode: int) -> str:
    for test, name in ((stat.S_ISLNK, "a symbolic link"), (stat.S_ISREG, "a file"),
                       (stat.S_ISCHR, "a character device"), (stat.S_ISBLK, "a block device"),
                       (stat.S_ISFIFO, "a FIFO (named pipe)"), (stat.S_ISSOCK, "a socket")):
        if test(mode):
            return name
    return "not a folder"


def read_marker(folder: Path) -> dict | None:
    """The marker of a folder, or None when it has no valid marker of this tool."""
    p = Path(folder) / MARKER
    try:
        st = os.lstat(p)
        if not stat.S_ISREG(st.st_mode) or st.st_size > MAX_MARKER_BYTES:
            return None
        data = json.loads(p.read_text(encoding="utf-8"))
    except (OSError, ValueError, RecursionError):
        return None
    if not isinstance(data, dict) or data.get("tool") != "qualbayes":
        return None
    files = data.get("files", [])
    if not isinstance(files, list) or not all(_safe_relative(f) for f in files):
        return None
    return data


def _safe_relative(name: object) -> bool:
    if not isinstance(name, str) or not name or name.startswith("/") or "\\" in name:
        return False
    return all(part not in ("", ".", "..") for part in name.split("/"))


def _walk(folder: Path) -> tuple[list[tuple[str, os.stat_result]], bool]:
    """(relative path, lstat) of everything under ``folder`` (symlinks not followed), and
    whether the walk stopped at MAX_ENTRIES."""
    out: list[tuple[str, os.stat_result]] = []
    stack = [""]
    while stack:
        rel = stack.pop()
        with os.scandir(folder / rel if rel else folder) as it:
            for entry in it:
                name = f"{rel}/{entry.name}" if rel else entry.name
                st = entry.stat(follow_symlinks=False)
                out.append((name, st))
                if len(out) > MAX_ENTRIES:
                    return out, True
                if stat.S_ISDIR(st.st_mode):
                    stack.append(name)
    return out, False


def _listing(names: list[str], more: bool = False) -> str:
    shown = ", ".join(names[:6])
    extra = len(names) - 6
    if extra > 0 or more:
        shown += f" and {'more than ' if more else ''}{max(extra, 0)} more"
    return shown


def inspect(path: Path) -> Inspection:
    """What is at ``path`` (never following it if it is a link, device, FIFO or socket)."""
    path = Path(path)
    try:
        st = os.lstat(path)
    except FileNotFoundError:
        return Inspection(path, "absent")
    if not stat.S_ISDIR(st.st_mode):
        return Inspection(path, "other", _kind_of(st.st_mode))
    entries, truncated = _walk(path)
    if not entries:
        return Inspection(path, "empty", "an empty folder")
    marker = read_marker(path)
    listed = set(marker["files"]) if marker else set()
    parents = {"/".join(f.split("/")[:k]) for f in listed for k in range(1, f.count("/") + 1)}
    strangers = []
    for name, est in entries:
        if name == MARKER:
            continue
        if stat.S_ISREG(est.st_mode) and name in listed:
            continue
        if stat.S_ISDIR(est.st_mode) and name in parents:
            continue
        strangers.append(name + ("/" if stat.S_ISDIR(est.st_mode) else ""))
    if marker is None or strangers or truncated:
        if marker is None:
            what = "a folder not made by qualbayes (no marker file " + MARKER + ") holding " \
                   + _listing(sorted(n for n, _ in entries if "/" not in n), truncated)
        else:
            what = ("a qualbayes output folder to which other files were added: "
                    + _listing(sorted(strangers), truncated))
        return Inspection(path, "foreign", what, marker or {})
    noun = {"evidence": "evidence set", "report": "report"}.get(marker.get("kind"), "output")
    return Inspection(path, "ours", f"an earlier qualbayes {noun} ({len(listed)} files)",
                      marker, sorted(listed))


def _inputs_in(path: Path) -> list[str]:
    found = list(inputs_inside(path))
    try:
        st = os.lstat(path)
    except OSError:
        return found
    if is_input(st):
        found.append(str(path))
    if stat.S_ISDIR(st.st_mode):
        entries, _ = _walk(path)
        for n, est in entries:
            if stat.S_ISLNK(est.st_mode):  # a link to an input counts as the input
                with contextlib.suppress(OSError):
                    est = os.stat(path / n)
            if stat.S_ISREG(est.st_mode) and is_input(est):
                found.append(str(path / n))
    return list(dict.fromkeys(found))


def check_parent(folder: Path, option: str) -> None:
    """The place for the folder must be a folder (or creatable) and writable (exit 2)."""
    folder = Path(folder)
    existing = folder.parent
    while not os.path.lexists(existing) and existing != existing.parent:
        existing = existing.parent
    if not existing.is_dir():
        raise OptionError(f"{option} {folder}: {existing} is a file, not a folder")
    if not os.access(existing, os.W_OK | os.X_OK):
        raise OptionError(f"{option} {folder}: the folder {existing} is not writable")


def check_target(folder: Path, force: bool, option: str = "--out") -> Inspection:
    """Refuse (exit 3) unless the folder may be written: see the module docstring."""
    folder = Path(folder)
    check_parent(folder, option)
    held = _inputs_in(folder)
    if held:
        raise OutputExistsError(
            f"refusing to write {option} {folder}: it holds {', '.join(held)}, an input file "
            "of this run; it is never overwritten or removed, whatever --force says. Choose "
            "another folder")
    found = inspect(folder)
    if found.state in ("absent", "empty"):
        return found
    if found.state == "other":
        raise OutputExistsError(
            f"refusing to write {option} {folder}: it is {found.what}, not a folder; nothing "
            "is written there, whatever --force says. Choose another folder")
    if found.state == "foreign":
        raise OutputExistsError(
            f"refusing to replace {option} {folder}: it is {found.what}. --force replaces only "
            "a folder holding nothing but an earlier qualbayes report or evidence set; choose "
            "a new folder")
    if not force:
        raise OutputExistsError(
            f"refusing to overwrite {found.what} in {folder} (give --force to replace it, or "
            "choose another folder)")
    return found


def write_set(folder: Path, files: dict[str, Writer], *, force: bool, option: str = "--out",
              kind: str = "evidence", stamp: dict | None = None) -> list[Path]:
    """Write ``files`` (relative name -> writer(path)) as the set at ``folder``."""
    folder = Path(os.path.abspath(folder))
    for name in files:
        if not _safe_relative(name) or name == MARKER:
            raise ValueError(f"not a file name of a set: {name!r}")
    check_parent(folder, option)
    folder.parent.mkdir(parents=True, exist_ok=True)
    with swap.locked([folder.parent]):
        clean_leftovers(folder.parent)
        found = check_target(folder, force, option)  # again, now under the lock
        stage = Path(tempfile.mkdtemp(
            prefix=f".{folder.name}.qualbayes-partial-{os.getpid()}-", dir=folder.parent))
        try:
            public_mode(stage, directory=True)
            base = {"tool": "qualbayes", "kind": kind, "pid": os.getpid(),
                    "created_utc": dt.datetime.now(dt.UTC).isoformat(timespec="seconds"),
                    **(stamp or {})}
            _write_marker(stage, {**base, "state": "partial", "files": []})
            for name, writer in files.items():
                path = stage / name
                path.parent.mkdir(parents=True, exist_ok=True)
                writer(path)
                with open(path, "rb") as fh:
                    os.fsync(fh.fileno())
                public_mode(path)
            _write_marker(stage, {**base, "state": "complete", "files": sorted(files)})
            old = _put_in_place(stage, folder, found)
        except BaseException:
            shutil.rmtree(stage, ignore_errors=True)
            raise
        if old is not None:
            remove_set(old)
    return [folder / name for name in files]


def _write_marker(folder: Path, content: dict) -> None:
    path = folder / MARKER
    tmp = folder / (MARKER + ".tmp")
    tmp.write_text(json.dumps(content, indent=1, ensure_ascii=False), encoding="utf-8")
    with open(tmp, "rb") as fh:
        os.fsync(fh.fileno())
    public_mode(tmp)
    os.replace(tmp, path)


def _put_in_place(stage: Path, folder: Path, found: Inspection) -> Path | None:
    """Move the complete staging folder to ``folder``; returns where the old set now is."""
    with swap.signals_held():
        if found.state == "absent":
            try:
                swap.rename_noreplace(stage, folder)
            except FileExistsError:
                raise OutputExistsError(f"refusing to overwrite {folder}: it appeared while "
                                        "this run was writing") from None
            return None
        if swap.exchange(stage, folder):
            return stage
        old = Path(tempfile.mkdtemp(
            prefix=f".{folder.name}.qualbayes-old-{os.getpid()}-", dir=folder.parent))
        old.rmdir()
        os.rename(folder, old)
        os.rename(stage, folder)
        return old


def remove_set(folder: Path) -> None:
    """Remove an old set: the files its marker lists, then the empty folders. Anything else
    found in it is left, and said."""
    found = inspect(folder)
    if found.state == "empty":
        with contextlib.suppress(OSError):
            os.rmdir(folder)
        return
    listed = found.files if found.state == "ours" else (
        list(found.marker.get("files", [])) if found.marker else [])
    for name in listed:
        with contextlib.suppress(FileNotFoundError, IsADirectoryError, NotADirectoryError):
            p = folder / name
            if stat.S_ISREG(os.lstat(p).st_mode):
                os.unlink(p)
    if found.marker:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(folder / MARKER)
    for dirpath, _, _ in sorted(os.walk(folder), key=lambda w: -len(w[0])):
        with contextlib.suppress(OSError):
            os.rmdir(dirpath)
    if os.path.lexists(folder):
        from qualbayes.evidence.terminal import print_text  # noqa: PLC0415

        print_text(f"qualbayes: note: the earlier set was replaced; files not written by "
                   f"qualbayes were found in it and kept in {folder}", file=sys.stderr)


def clean_leftovers(parent: Path) -> list[Path]:
    """Remove staging folders of runs that died (their process is gone) beside the targets;
    an old set whose swap was cut between two renames is put back first."""
    cleaned = []
    try:
        names = os.listdir(parent)
    except OSError:
        return cleaned
    for name in names:
        m = _LEFTOVER.match(name)
        if not m or swap.pid_alive(int(m["pid"])):
            continue
        path = Path(parent) / name
        marker = read_marker(path)
        if marker is None or (marker.get("state") == "partial"
                              and marker.get("pid") != int(m["pid"])):
            continue
        target = Path(parent) / m["name"]
        if m["what"] == "old" and not os.path.lexists(target):
            with contextlib.suppress(OSError):
                swap.rename_noreplace(path, target)
                continue
        if marker.get("state") == "partial":
            shutil.rmtree(path, ignore_errors=True)
        else:
            remove_set(path)
        cleaned.append(path)
    return cleaned
