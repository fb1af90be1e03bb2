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

from qualbayes.errors import OutputExistsError


def check_targets(paths: Iterable[Path], force: bool) -> None:
    """Refuse before any work is written if a target exists (and force is off)."""
    existing = [str(p) for p in paths if p.exists()]
    if existing and not force:
        raise OutputExistsError(
            "refusing to overwrite " + ", ".join(existing) + " (give --force to replace, "
            "or choose another --out folder)")


def write_atomic(path: Path, writer: Callable[[Path], None], force: bool = False) -> Path:
    """Call ``writer(tmp_path)`` then rename the temporary file onto ``path``."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    if path.exists() and not force:
        raise OutputExistsError(f"refusing to overwrite {path} (give --force to replace)")
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    os.close(fd)
    try:
        writer(Path(tmp))
        with open(tmp, "rb") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    finally:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
    return path


def write_text_atomic(path: Path, text: str, force: bool = False) -> Path:
    return write_atomic(path, lambda p: p.write_text(text, encoding="utf-8"), force)
