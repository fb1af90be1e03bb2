"""Writes the invented life-data demos of this folder
(run: python example_lots/make_life_examples.py).

Scenario (fictional): Kestrel Fluid Systems, Dunmore plant, builds the SV-30 solenoid valve
for heating circuits. The requirement: R(5000 h) >= 0.90 at 90% confidence.

  sv30_rig_test.xlsx / .csv   endurance rig test of two design revisions (Rev B with the
                              old coil former, Rev C with the new one); units taken off the
                              rig for other tests or still running at the cut-off are
                              suspensions. Hours.
  sv30_field_returns.csv      field-service export: valves are inspected at service visits
                              every 1,500 to 2,500 h; a failed valve is known only to have
                              failed between its last good visit and the visit that found
                              it (interval-censored); some were found failed at the first
                              visit (left-censored); the rest are still running. Hours.
  sv30_zero_failure.csv       qualification test of Rev C: 14 valves on the rig to 4,000 h,
                              no failures. Use with --shape-prior (e.g. 1.5,4 for coil and
                              seal wear-out).
Nothing here is real data.
"""

from __future__ import annotations

import csv
import datetime as dt
from pathlib import Path

import numpy as np

HERE = Path(__file__).parent
RIG_TITLE = "SV-30 endurance rig - Kestrel Fluid Systems, Dunmore plant (demo data)"
RIG_HEADER = ["Serial No.", "Design Revision", "Hours", "Status"]
FIELD_HEADER = ["Serial", "Last Seen Working", "Found Failed", "Hours", "Status"]
ZERO_HEADER = ["Unit ID", "Test Time", "State"]


def rig_rows(rng) -> list[list[object]]:
    rows: list[list[object]] = []
    plan = [("Rev B", "B", 1.9, 7200.0, 18), ("Rev C", "C", 2.6, 11000.0, 16)]
    for rev, prefix, shape, scale, count in plan:
        life = scale * rng.weibull(shape, size=count)
        cutoff = 6000.0
        pulled = rng.random(count) < 0.2  # taken off the rig early for teardown
        pulled_at = rng.uniform(1000, cutoff, size=count)
        for k in range(count):
            end = pulled_at[k] if pulled[k] else cutoff
            if life[k] < end:
                rows.append([f"SV30-{prefix}{k + 1:03d}", rev, round(float(life[k]), 1), "failed"])
            else:
                status = "Suspended" if pulled[k] else "Running"
                rows.append([f"SV30-{prefix}{k + 1:03d}", rev, round(float(end), 1), status])
    return rows


def field_rows(rng) -> list[list[object]]:
    rows: list[list[object]] = []
    n = 160
    life = 12500.0 * rng.weibull(2.3, size=n)
    for k in range(n):
        age_now = float(rng.uniform(3000, 15000))
        visits, t = [], 0.0
        while True:
            t += float(rng.uniform(1500, 2500))
            if t > age_now:
                break
            visits.append(round(t))
        serial = f"F{24001 + k}"
        failed_at = next((v for v in visits if v >= life[k]), None)
        if failed_at is None:
            last = visits[-1] if visits else None
            rows.append([serial, last, None, round(age_now), "running"])
            continue
        before = [v for v in visits if v < failed_at]
        rows.append([serial, before[-1] if before else None, failed_at, None, "failed"])
    # two valves found failed at their first service visit (left-censored)
    rows.append([f"F{24001 + n}", None, 1850, None, "failed"])
    rows.append([f"F{24002 + n}", None, 2110, None, "failed"])
    return rows


def zero_rows() -> list[list[object]]:
    return [[f"QC-{k + 1:02d}", 4000, "suspended"] for k in range(14)]


def write_csv(name: str, header: list[str], rows) -> None:
    with open(HERE / name, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        for r in rows:
            w.writerow(["" if v is None else v for v in r])


def write_rig_xlsx(rows) -> None:
    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    ws.title = "Rig test"
    ws.append([RIG_TITLE])
    ws.append(RIG_HEADER)
    for r in rows:
        ws.append(r)
    wb.properties.creator = "qualbayes demo"
    wb.properties.created = dt.datetime(2026, 11, 1)
    wb.properties.modified = dt.datetime(2026, 11, 1)
    wb.save(HERE / "sv30_rig_test.xlsx")


if __name__ == "__main__":
    rng = np.random.default_rng(30)
    rig = rig_rows(rng)
    write_csv("sv30_rig_test.csv", RIG_HEADER, rig)
    write_rig_xlsx(rig)
    field = field_rows(rng)
    write_csv("sv30_field_returns.csv", FIELD_HEADER, field)
    write_csv("sv30_zero_failure.csv", ZERO_HEADER, zero_rows())
    print(f"wrote {len(rig)} rig units, {len(field)} field units, 14 zero-failure units")
