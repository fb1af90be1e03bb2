"""Small builders of test spreadsheets (written into pytest's tmp_path)."""

from __future__ import annotations

import csv
from pathlib import Path

LOT_HEADER = ["Lot No.", "Part Number", "Supplier", "Inspection Date", "Lot Qty",
              "Qty Inspected", "Nonconforming"]
GOOD_ROWS = [
    ["L-1", "KV-1", "Acme", "2026-07-01", 2000, 125, 0],
    ["L-2", "KV-1", "Acme", "2026-07-02", 2000, 125, 1],
    ["L-3", "KV-1", "Acme", "2026-07-03", 800, 80, 0],
]


def write_csv(path: Path, header, rows, delimiter=",", encoding="utf-8") -> Path:
    with open(path, "w", newline="", encoding=encoding) as fh:
        w = csv.writer(fh, delimiter=delimiter)
        if header is not None:
            w.writerow(header)
        w.writerows(rows)
    return path


def write_xlsx(path: Path, header, rows, title="Inspection", extra_sheets=None,
               hidden_first=False, title_row=None) -> Path:
    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    if hidden_first:
        ws.title = "Old"
        ws.append(["nothing", "here"])
        ws.sheet_state = "hidden"
        ws = wb.create_sheet(title)
    else:
        ws.title = title
    if title_row:
        ws.append([title_row])
    if header is not None:
        ws.append(header)
    for r in rows:
        ws.append(r)
    for name, content in (extra_sheets or {}).items():
        s = wb.create_sheet(name)
        for r in content:
            s.append(r)
    wb.save(path)
    return path


HEAVY = ("jax", "numpyro", "arviz", "matplotlib")


def heavy_imports(*argvs: list[str]) -> list[str]:
    """Run ``qualbayes`` on each argument list in a fresh interpreter (output discarded) and
    return which of the heavy modules (jax, numpyro, arviz, matplotlib) it imported."""
    import json
    import subprocess
    import sys

    code = (
        "import io, contextlib, json, sys\n"
        "from qualbayes.cli import main\n"
        "with contextlib.redirect_stdout(io.StringIO()):\n"
        f"    rcs = [main(argv) for argv in {list(argvs)!r}]\n"
        f"assert all(rc == 0 for rc in rcs), rcs\n"
        f"print(json.dumps([m for m in {HEAVY!r} if m in sys.modules]))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    return json.loads(out.strip().splitlines()[-1])
