"""Writing a report folder: HTML, PDF, evidence workbook, run record and figure PNGs.

Everything is rendered in memory (figures, HTML, workbook, record) before any file is
written; the folder is then written as one set (see :mod:`qualbayes.evidence.output_set`).
"""

from __future__ import annotations

import importlib
from pathlib import Path

#: run-record kind -> (report builder, workbook sheets builder), "module:function"
KINDS = {
    "lots": ("qualbayes.evidence.lot_report:build", "qualbayes.evidence.lot_record:lots_sheets"),
    "life": ("qualbayes.evidence.life_report:build", "qualbayes.evidence.life_record:life_sheets"),
    "plan": ("qualbayes.evidence.plan_report:build", "qualbayes.evidence.plan_record:plan_sheets"),
    "at-use": ("qualbayes.evidence.accelerated_report:build",
               "qualbayes.evidence.accelerated_record:at_use_sheets"),
    "returns": ("qualbayes.evidence.forecast_report:build",
                "qualbayes.evidence.forecast_record:returns_sheets"),
    "suppliers": ("qualbayes.evidence.supplier_report:build",
                  "qualbayes.evidence.suppliers_record:suppliers_sheets"),
}

FILES = ("report.html", "report.pdf", "evidence.xlsx", "run.json")


def _load(ref: str):
    module, func = ref.split(":")
    return getattr(importlib.import_module(module), func)


def check_report_target(out_dir: Path, force: bool, option: str = "--report") -> None:
    """Refuse before any work unless the folder may be written (see output_set)."""
    from qualbayes.evidence.output_set import check_target  # noqa: PLC0415

    check_target(Path(out_dir), force, option)


UNVERIFIED = ("UNVERIFIED RECORD: this report was rebuilt from a run record written before "
              "records carried a digest, so edits made to it after the run cannot be ruled "
              "out. Check its numbers against the original run before acting on them.")


def report_files(record: dict, banner: str | None = None) -> tuple[dict, dict]:
    """The files of the report of ``record`` (relative name -> writer), all rendered in
    memory first, and {"pages", "figures"}. ``banner`` is shown above everything."""
    from qualbayes.evidence.html import png_bytes, render_html  # noqa: PLC0415
    from qualbayes.evidence.jsonout import dumps  # noqa: PLC0415
    from qualbayes.evidence.pdf import write_pdf  # noqa: PLC0415
    from qualbayes.evidence.workbook import workbook_writer  # noqa: PLC0415

    if record.get("kind") not in KINDS:
        raise ValueError(f"no report for a run of kind {record.get('kind')!r}")
    build, sheets = (_load(r) for r in KINDS[record["kind"]])
    report = build(record)
    if banner:
        report.alert = banner + (f" {report.alert}" if report.alert else "")
    try:
        pngs = {f.id: png_bytes(f.figure) for f in report.figures()}
    finally:
        _close_figures(report)
    html = render_html(report, pngs)
    book = workbook_writer(sheets(record))
    text = dumps(record)
    info = {"figures": len(pngs), "pages": 0}

    def pdf(path: Path) -> None:
        info["pages"] = write_pdf(report, path, pngs)

    files = {"report.html": lambda p: p.write_text(html, encoding="utf-8"),
             "report.pdf": pdf, "evidence.xlsx": book,
             "run.json": lambda p: p.write_text(text, encoding="utf-8")}
    for name, data in pngs.items():
        files[f"figures/{name}.png"] = lambda p, data=data: p.write_bytes(data)
    return files, info


def write_report_folder(out_dir: Path, record: dict, force: bool = False,
                        banner: str | None = None) -> dict:
    """Build and write the report of ``record``; returns {"folder", "pages", "figures"}.

    The folder is written by :func:`qualbayes.evidence.output_set.write_set`: complete in a
    staging folder first, then put in place in one step; an existing folder is replaced only
    with ``force`` and only if it is an earlier qualbayes set holding no input of the run.
    """
    from qualbayes.evidence.output_set import write_set  # noqa: PLC0415

    out_dir = Path(out_dir)
    check_report_target(out_dir, force)
    files, info = report_files(record, banner)
    write_set(out_dir, files, force=force, option="--report", kind="report",
              stamp={"report_id": record.get("report_id")})
    return {"folder": out_dir, **info}


def _close_figures(report) -> None:
    import matplotlib.pyplot as plt  # noqa: PLC0415

    for f in report.figures():
        if not isinstance(f.figure, bytes):
            plt.close(f.figure)
