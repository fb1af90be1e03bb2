"""Writes the invented accelerated-life and installed-base demos of this folder
(run: python example_lots/make_accelerated_examples.py).

Scenario (fictional): Velliran Motion Systems, Harrowgate Fen plant, builds the VM-12
motor driver board for ventilation units. Boards run about 12 h a day (365 h a month) at a
board temperature of about 45 C. The requirement: R(40,000 h) >= 0.95 at 90% confidence.

  vm12_thermal_test.csv     oven test at 85, 105 and 125 C, 20 boards each, stopped at
                            2,000 h; the 85 C boards were checked at inspections every 500 h,
                            so their failures are known only between two inspections
                            (interval-censored). Hours.
  vm12_installed_base.csv   boards in service as of 2026-11-30: shipment batches with ship
                            date, quantity and region.

Try:
  qualbayes at-use example_lots/vm12_thermal_test.csv --stress-column "Oven Temp (C)"
      --relation arrhenius --use 45C --mission 40000 --target 0.95 --units h
  qualbayes returns example_lots/vm12_installed_base.csv --life
      example_lots/vm12_thermal_test.csv --stress-column "Oven Temp (C)" --relation
      arrhenius --use 45C --usage 365 --as-of 2026-11-30 --horizon 24 --spares 300
Nothing here is real data.
"""

from __future__ import annotations

import csv
import datetime as dt
from pathlib import Path

import numpy as np

HERE = Path(__file__).parent
K_B = 8.617333262e-5
TEST_HEADER = ["Serial", "Oven Temp (C)", "Hours", "Status", "Last Seen Working",
               "Found Failed"]
FLEET_HEADER = ["Batch", "Ship Date", "Qty", "Region"]


def test_rows(rng) -> list[list[object]]:
    rows: list[list[object]] = []
    stop, every = 2000.0, 500.0
    for temp in (85, 105, 125):
        kelvin = temp + 273.15
        eta = 3000.0 * np.exp(0.65 / K_B * (1 / kelvin - 1 / 378.15))
        life = eta * rng.weibull(1.8, size=20)
        for k, t in enumerate(life):
            serial = f"VM12-{temp}-{k + 1:02d}"
            if t >= stop:
                rows.append([serial, temp, stop, "S", None, None])
            elif temp == 85:
                found = every * np.ceil(t / every)
                seen = found - every
                rows.append([serial, temp, None, "F", seen or None, found])
            else:
                rows.append([serial, temp, round(float(t), 1), "F", None, None])
    return rows


def fleet_rows(rng) -> list[list[object]]:
    rows: list[list[object]] = []
    start = dt.date(2023, 12, 1)
    for k in range(36):  # one batch a month per region
        month = dt.date(start.year + (start.month - 1 + k) // 12,
                        (start.month - 1 + k) % 12 + 1, 15)
        for region in ("North", "South", "Export"):
            qty = int(rng.integers(300, 700))
            rows.append([f"B{k + 1:02d}-{region[0]}", month.isoformat(), qty, region])
    return rows


def write(path: Path, header, rows) -> None:
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        w.writerows(rows)


def main() -> None:
    rng = np.random.default_rng(1712)
    write(HERE / "vm12_thermal_test.csv", TEST_HEADER, test_rows(rng))
    write(HERE / "vm12_installed_base.csv", FLEET_HEADER, fleet_rows(rng))


if __name__ == "__main__":
    main()
