"""Writes the invented demo data of this folder (run: python example_lots/make_examples.py).

Scenario (fictional): Kestrel Fluid Systems, Dunmore plant, receives three purchased parts.
  KV-220 valve seat   from Alder Castings       (stable, very few defects)
  PC-14 pump cover    from Brightwater Machining (about 0.4% defective)
  GS-7 gasket         from Tarnbeck Polymers     (mostly fine; lot G-1108 is clearly bad)
Lot B-2215 is the borderline lot. Nothing here is real data.
"""

from __future__ import annotations

import csv
import datetime as dt
from pathlib import Path

import numpy as np

HERE = Path(__file__).parent
TITLE = "Incoming inspection export - Kestrel Fluid Systems, Dunmore plant (demo data)"
HEADER = ["Lot No.", "Part Number", "Supplier", "Inspection Date", "Lot Qty",
          "Qty Inspected", "Nonconforming"]


def lots() -> list[list[object]]:
    rng = np.random.default_rng(7)
    rows: list[list[object]] = []
    specs = [("KV-220", "Alder Castings", "A", 0.0015, 14),
             ("PC-14", "Brightwater Machining", "B", 0.004, 12),
             ("GS-7", "Tarnbeck Polymers", "G", 0.003, 10)]
    for part, supplier, prefix, rate, count in specs:
        day = dt.date(2026, 7, 1)
        for k in range(count):
            size = int(rng.choice([800, 1200, 2000, 3200, 5000]))
            n = {800: 80, 1200: 125, 2000: 125, 3200: 200, 5000: 315}[size]
            x = int(rng.binomial(n, rate))
            day = day + dt.timedelta(days=int(rng.integers(1, 4)))
            rows.append([f"{prefix}-{1101 + k:04d}", part, supplier, day, size, n, x])
    for r in rows:
        if r[0] == "G-1108":
            r[6] = 9  # the clearly bad lot
    # borderline: a lot whose observed rate sits exactly at a 1% limit (2 in 200), so the
    # decision stays open at 95% even with the part's history
    rows.append(["B-2215", "PC-14", "Brightwater Machining", day + dt.timedelta(days=2),
                 3200, 200, 2])
    rows.sort(key=lambda r: r[3])
    return rows


def write_csv(rows) -> None:
    with open(HERE / "incoming_inspection.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(HEADER)
        for r in rows:
            w.writerow([*r[:3], r[3].isoformat(), *r[4:]])


def write_xlsx(rows) -> None:
    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    ws.title = "Inspection"
    ws.append([TITLE])
    ws.append(HEADER)
    for r in rows:
        ws.append([*r[:3], dt.datetime.combine(r[3], dt.time()), *r[4:]])
    for row in ws.iter_rows(min_row=3, min_col=4, max_col=4):
        row[0].number_format = "yyyy-mm-dd"
    wb.properties.creator = "qualbayes demo"
    wb.properties.created = dt.datetime(2026, 11, 1)
    wb.properties.modified = dt.datetime(2026, 11, 1)
    wb.save(HERE / "incoming_inspection.xlsx")


if __name__ == "__main__":
    data = lots()
    write_csv(data)
    write_xlsx(data)
    print(f"wrote {len(data)} lots")
