"""Writing output files without losing anything.

Every file is written to a temporary name in its target folder and renamed into place, so
an interrupted run leaves either the old file or the new one, never half of one. An
existing file is never replaced unless ``force`` is given.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Callable, Iterable
from pathlib import Path

from qualbayes.errors import OptionError, OutputExistsError


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def public_mode(path: Path, directory: bool = False) -> None:
    """Give a file made by mkstemp/mkdtemp (0600/0700) the usual permissions under umask."""
    os.chmod(path, (0o777 if directory else 0o666) & ~_umask())


#: (device, inode) of this run's input files: no output is ever written over them, whatever
#: --out and --force say (``qualbayes lots lot_decisions.xlsx --out . --force``).
_INPUTS: set[tuple[int, int]] = set()
#: The same inputs as resolved paths, so a folder holding one is never replaced.
_INPUT_PATHS: dict[Path, str] = {}


def protect_inputs(*paths) -> None:
    """Mark input files as never to be replaced (symlinks and hard links included)."""
    for p in paths:
        if p is None:
            continue
        with contextlib.suppress(OSError, ValueError):
            st = os.stat(p)
            _INPUTS.add((st.st_dev, st.st_ino))
            _INPUT_PATHS[Path(p).resolve()] = str(p)


def release_inputs() -> None:
    _INPUTS.clear()
    _INPUT_PATHS.clear()


def is_input(st: os.stat_result) -> bool:
    """Whether a file (by its stat) is one of this run's inputs."""
    return (st.st_dev, st.st_ino) in _INPUTS


def inputs_inside(folder: Path) -> list[str]:
    """Inputs of this run that lie inside ``folder`` (as given on the command line)."""
    try:
        root = Path(folder).resolve()
    except (OSError, RuntimeError):
        return []
    return [given for path, given in _INPUT_PATHS.items()
            if path == root or root in path.parents]


def _refuse_input(path: Path) -> None:
    try:
        st = os.stat(path)
    except OSError:
        return
    if (st.st_dev, st.st_ino) in _INPUTS:
        raise OutputExistsError(f"--out: {path} is an input file of this run; it is never "
                                "overwritten. Choose another --out folder")


def check_targets(paths: Iterable[Path], force: bool) -> None:
    """Refuse before any work is written if a target exists (and force is off)."""
    paths = [Path(p) for p in paths]
    for folder in dict.fromkeys(p.parent for p in paths):
        _check_folder(folder)
    for p in paths:
        _refuse_input(p)
    existing = [str(p) for p in paths if p.exists()]
    if existing and not force:
        raise OutputExistsError(
            "refusing to overwrite " + ", ".join(existing) + " (give --force to replace, "
            "or choose another --out folder)")


def _check_folder(folder: Path) -> None:
    """The output folder must be a folder (or creatable) and writable, checked before any
    work is done so that a typo in --out is not found only after a long fit."""
    existing = folder
    while not existing.exists() and existing != existing.parent:
        existing = existing.parent
    if not existing.is_dir():
        raise OptionError(f"--out {folder}: {existing} is a file, not a folder")
    if not os.access(existing, os.W_OK | os.X_OK):
        raise OptionError(f"--out {folder}: the folder {existing} is not writable")


def write_atomic(path: Path, writer: Callable[[Path], None], force: bool = False) -> Path:
    """Call ``writer(tmp_path)`` then rename the temporary file onto ``path``."""
    path = Path(path)
    _refuse_input(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    if path.exists() and not force:
        raise OutputExistsError(f"refusing to overwrite {path} (give --force to replace)")
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    os.close(fd)
    try:
        writer(Path(tmp))
        with open(tmp, "rb") as fh:
            os.fsync(fh.fileno())
        public_mode(Path(tmp))
        os.replace(tmp, path)
    finally:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
    return path


def write_text_atomic(path: Path, text: str, force: bool = False) -> Path:
    return write_atomic(path, lambda p: p.write_text(text, encoding="utf-8"), force)


def write_group(files: list[tuple[Path, Callable[[Path], None]]], force: bool = False
                ) -> list[Path]:
    """Write several files that belong together (a workbook and its run record).

    Every file is written completely under a temporary name first; only then are they
    renamed into place, one after the other. An interrupted run therefore leaves the earlier
    set untouched unless it was already renaming (a few microseconds), and never a half
    file. Temporary files are removed on any error or interrupt that Python sees.
    """
    targets = [Path(p) for p, _ in files]
    for path in targets:
        _refuse_input(path)
    if not force:
        check_targets(targets, force)
    temps: list[str] = []
    try:
        for path, writer in zip(targets, (w for _, w in files), strict=True):
            path.parent.mkdir(parents=True, exist_ok=True)
            fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
            os.close(fd)
            temps.append(tmp)
            writer(Path(tmp))
            with open(tmp, "rb") as fh:
                os.fsync(fh.fileno())
            public_mode(Path(tmp))
        for tmp, path in zip(temps, targets, strict=True):
            os.replace(tmp, path)
    finally:
        for tmp in temps:
            with contextlib.suppress(FileNotFoundError):
                os.unlink(tmp)
    return targets
