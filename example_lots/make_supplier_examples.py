"""Writes the invented supplier-scorecard demo (run: python example_lots/make_supplier_examples.py).

Scenario (fictional): the Dunmore plant of the invented Kestrel Fluid Systems buys machined
and moulded parts from six invented suppliers over two years (2025-Q1 to 2026-Q4). Five are
steady; Wrenholt Fasteners drifts: its defect rate climbs in the last two quarters (from
about 0.4% to 1%, then 3%). Two lots of the last quarter are still open (no result yet).

The export imitates a plant ERP layout: a cover sheet, a title row, ERP-style headers
("Inspection lot", "Sample Qty", "Defective qty", "Insp. start date") and a column the tool
does not use ("Inspector"). The supplier names are coined for this demo and belong to no
company we know of. Nothing here is real data.
"""

from __future__ import annotations

import csv
import datetime as dt
from pathlib import Path

import numpy as np

HERE = Path(__file__).parent
HEADER = ["Inspection lot", "Material No.", "Vendor", "Insp. start date", "Lot Qty",
          "Sample Qty", "Defective qty", "Inspector"]
#: (supplier, material, lot prefix, defect rate per quarter 1..8)
SUPPLIERS = [
    ("Quillmoor Castings", "VB-310", "QC", [0.003] * 8),
    ("Tarnvale Mouldings", "HS-22", "TM", [0.006] * 8),
    ("Pettlebrook Machining", "SH-7", "PM", [0.0025] * 8),
    ("Faldstone Springs", "SP-40", "FS", [0.008] * 8),
    ("Ossery Gaskets", "GK-5", "OG", [0.004] * 8),
    ("Wrenholt Fasteners", "FB-12", "WF", [0.004] * 6 + [0.01, 0.03]),
]
SAMPLES = {500: 50, 1200: 80, 3000: 125, 8000: 200}  # lot size -> sample (illustrative)


def lots() -> list[list[object]]:
    rng = np.random.default_rng(15)
    rows: list[list[object]] = []
    for supplier, material, prefix, rates in SUPPLIERS:
        k = 0
        for q, rate in enumerate(rates):
            year, first_month = 2025 + q // 4, 3 * (q % 4) + 1
            for _ in range(int(rng.integers(7, 11))):
                k += 1
                size = int(rng.choice(list(SAMPLES)))
                n = SAMPLES[size]
                p = rng.beta(rate * 400, (1 - rate) * 400)  # lot-to-lot spread
                day = dt.date(year, first_month + int(rng.integers(0, 3)),
                              int(rng.integers(1, 29)))
                rows.append([f"{prefix}-{k:04d}", material, supplier, day.isoformat(), size, n,
                             int(rng.binomial(n, p)), str(rng.choice(["kb", "jt", "mr"]))])
    rows.sort(key=lambda r: (r[3], r[0]))
    for r in rows[-12:]:
        if r[2] in ("Quillmoor Castings", "Ossery Gaskets") and r[6] is not None:
            r[6] = None  # an open lot: sampled, no result recorded yet
    return rows


def main() -> None:
    rows = lots()
    with open(HERE / "supplier_lots.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(HEADER)
        w.writerows(rows)
    from openpyxl import Workbook

    wb = Workbook()
    cover = wb.active
    cover.title = "Cover"
    cover.append(["Supplier quality export, Kestrel Fluid Systems, Dunmore plant (demo)"])
    cover.append(["Period", "2025-Q1 to 2026-Q4"])
    ws = wb.create_sheet("Inspection lots")
    ws.append(["Incoming inspection results (invented demo data)"])
    ws.append(HEADER)
    for r in rows:
        ws.append(r)
    legend = wb.create_sheet("Legend")
    legend.append(["Column", "Meaning"])
    legend.append(["Sample Qty", "units inspected"])
    wb.save(HERE / "supplier_lots.xlsx")


if __name__ == "__main__":
    main()
