"""Writing a report folder: HTML, PDF, evidence workbook, run record and figure PNGs.

The folder is assembled under a temporary name beside its target and renamed into place at
the end, so an interrupted run leaves no half folder; an existing folder is replaced only
with ``force`` (and then only once the new one is complete).
"""

from __future__ import annotations

import contextlib
import importlib
import os
import shutil
import tempfile
from pathlib import Path

from qualbayes.errors import OutputExistsError
from qualbayes.evidence.files import public_mode

#: run-record kind -> (report builder, workbook sheets builder), "module:function"
KINDS = {
    "lots": ("qualbayes.evidence.lots_report:build", "qualbayes.evidence.lots_record:lots_sheets"),
    "life": ("qualbayes.evidence.life_report:build", "qualbayes.evidence.life_record:life_sheets"),
    "plan": ("qualbayes.evidence.plan_report:build", "qualbayes.evidence.plan_record:plan_sheets"),
}

FILES = ("report.html", "report.pdf", "evidence.xlsx", "run.json")


def _load(ref: str):
    module, func = ref.split(":")
    return getattr(importlib.import_module(module), func)


def check_report_target(out_dir: Path, force: bool) -> None:
    out_dir = Path(out_dir)
    if out_dir.exists() and (not out_dir.is_dir() or any(out_dir.iterdir())) and not force:
        raise OutputExistsError(f"refusing to overwrite the report folder {out_dir} (give "
                                "--force to replace it, or choose another folder)")


def write_report_folder(out_dir: Path, record: dict, force: bool = False) -> dict:
    """Build and write the report of ``record``; returns {"folder", "pages", "figures"}."""
    from qualbayes.evidence.html import png_bytes, render_html  # noqa: PLC0415
    from qualbayes.evidence.jsonout import dumps  # noqa: PLC0415
    from qualbayes.evidence.pdf import write_pdf  # noqa: PLC0415
    from qualbayes.evidence.workbook import write_workbook  # noqa: PLC0415

    out_dir = Path(out_dir)
    check_report_target(out_dir, force)
    if record.get("kind") not in KINDS:
        raise ValueError(f"no report for a run of kind {record.get('kind')!r}")
    build, sheets = (_load(r) for r in KINDS[record["kind"]])
    report = build(record)
    pngs = {f.id: png_bytes(f.figure) for f in report.figures()}
    out_dir.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out_dir.name}.partial-", dir=out_dir.parent))
    public_mode(tmp, directory=True)
    try:
        (tmp / "report.html").write_text(render_html(report, pngs), encoding="utf-8")
        pages = write_pdf(report, tmp / "report.pdf", pngs)
        write_workbook(tmp / "evidence.xlsx", sheets(record))
        (tmp / "run.json").write_text(dumps(record), encoding="utf-8")
        (tmp / "figures").mkdir()
        for name, data in pngs.items():
            (tmp / "figures" / f"{name}.png").write_bytes(data)
        _close_figures(report)
        _swap_into_place(tmp, out_dir, force)
    finally:
        if tmp.exists():
            shutil.rmtree(tmp, ignore_errors=True)
    return {"folder": out_dir, "pages": pages, "figures": len(pngs)}


def _close_figures(report) -> None:
    import matplotlib.pyplot as plt  # noqa: PLC0415

    for f in report.figures():
        if not isinstance(f.figure, bytes):
            plt.close(f.figure)


def _swap_into_place(tmp: Path, out_dir: Path, force: bool) -> None:
    if not out_dir.exists():
        os.replace(tmp, out_dir)
        return
    if not force:  # appeared meanwhile
        raise OutputExistsError(f"refusing to overwrite the report folder {out_dir}")
    old = Path(tempfile.mkdtemp(prefix=f".{out_dir.name}.old-", dir=out_dir.parent))
    old.rmdir()
    os.replace(out_dir, old)
    os.replace(tmp, out_dir)
    with contextlib.suppress(OSError):
        shutil.rmtree(old)
