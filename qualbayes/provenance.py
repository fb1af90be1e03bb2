"""Where a result came from: input fingerprint, versions, command line."""

from __future__ import annotations

import hashlib
import platform
import shlex
import sys
from importlib import metadata

PACKAGES = ("qualbayes", "numpy", "scipy", "pandas", "openpyxl", "matplotlib", "jax",
            "numpyro", "arviz")


def sha256_file(path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def versions() -> dict[str, str]:
    out = {"python": platform.python_version()}
    for name in PACKAGES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = "not installed"
    return out


def command_line(argv: list[str] | None = None) -> str:
    args = sys.argv[1:] if argv is None else argv
    return shlex.join(["qualbayes", *args])
