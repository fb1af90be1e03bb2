"""Benchmark of reading hostile and large inputs (run: python bench/bench_io.py). Prints a
markdown table of wall time, peak memory (the child's maximum resident set) and outcome.

1. one csv row of 188 MB of commas (refused before splitting; was 4 GB of memory);
2. an xlsx with one cell far to the right (column 1,000) on 50,000 rows (was 43 s, 552 MB);
3. 29 MB of wide rows with no header (was 50 s to refuse);
4. a 1,000,000-row csv read whole (--max-rows 1000000);
5. ``qualbayes lots --prior history`` on 200,000 lots (target: under 60 s and 2 GB).

Each case runs in a fresh process (``python bench/bench_io.py --case NAME``), so its peak
memory is its own. ``--quick`` scales the files down (for a smoke run); ``--timeout S``
bounds each case (default 900 s).
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))
os.environ.setdefault("CI", "true")


def make_wide_csv(d: Path, quick: bool) -> Path:
    p = d / "wide.csv"
    n = (8 if quick else 188) * 2**20
    with open(p, "w", encoding="utf-8") as fh:
        fh.write("Lot,Inspected,Defects\nA,50,0")
        chunk = "," * 2**20
        for _ in range(n // 2**20):
            fh.write(chunk)
        fh.write("\nB,50,1\n")
    return p


def make_padded_xlsx(d: Path, quick: bool) -> Path:
    from hostile_files import xlsx_with_sheet  # noqa: PLC0415

    rows = 5_000 if quick else 50_000
    far = "ALL"  # column 1,000
    body = ['<row r="1"><c r="A1" t="inlineStr"><is><t>Lot</t></is></c><c r="B1" '
            't="inlineStr"><is><t>Inspected</t></is></c><c r="C1" t="inlineStr"><is><t>'
            f'Defects</t></is></c><c r="{far}1"><v>0</v></c></row>']
    body += [f'<row r="{k}"><c r="A{k}"><v>{k}</v></c><c r="B{k}"><v>50</v></c>'
             f'<c r="C{k}"><v>0</v></c><c r="{far}{k}"><v>1</v></c></row>'
             for k in range(2, rows + 2)]
    xml = ('<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
           f'<sheetData>{"".join(body)}</sheetData></worksheet>').encode()
    return xlsx_with_sheet(d, "padded.xlsx", xml)


def make_headerless(d: Path, quick: bool) -> Path:
    p = d / "noheader.csv"
    target = (3 if quick else 29) * 2**20
    with open(p, "w", encoding="utf-8") as fh:
        i = 0
        while fh.tell() < target:
            fh.write(",".join(f"v{i}_{j}" for j in range(1000)) + "\n")
            i += 1
    return p


def make_million(d: Path, quick: bool) -> Path:
    p = d / "million.csv"
    n = 100_000 if quick else 1_000_000
    with open(p, "w", encoding="utf-8") as fh:
        fh.write("Lot,Part,Inspected,Defects\n")
        fh.writelines(f"L{i},P{i % 50},{50 + i % 200},{i % 3}\n" for i in range(n))
    return p


def make_history(d: Path, quick: bool) -> Path:
    import numpy as np  # noqa: PLC0415

    rng = np.random.default_rng(12)
    n = 20_000 if quick else 200_000
    sizes = rng.choice([50, 80, 125, 200, 315], size=n)
    rates = rng.beta(2, 400, size=n)
    defects = rng.binomial(sizes, rates)
    p = d / "history.csv"
    with open(p, "w", encoding="utf-8") as fh:
        fh.write("Lot,Part,Inspected,Defects\n")
        fh.writelines(f"H{i},KV-{i % 4},{s},{x}\n"
                      for i, (s, x) in enumerate(zip(sizes, defects, strict=True)))
    return p


CASES = {
    "wide csv row": (make_wide_csv, "read"),
    "padded xlsx": (make_padded_xlsx, "read"),
    "wide rows, no header": (make_headerless, "read"),
    "1,000,000-row csv": (make_million, "read-all"),
    "lots --prior history, 200,000 lots": (make_history, "history"),
}


def run_case(name: str, path: Path) -> dict:
    """In this (fresh) process: read or run, and report time, outcome and peak memory."""
    from qualbayes.errors import InputError  # noqa: PLC0415

    kind = CASES[name][1]
    t0 = time.perf_counter()
    try:
        if kind == "history":
            from qualbayes.cli import main  # noqa: PLC0415

            code = main(["lots", str(path), "--spec", "1%", "--prior", "history",
                         "--max-rows", "1000000", "--json"])
            outcome = f"exit {code}"
        else:
            from qualbayes.data.lot_table import read_lots  # noqa: PLC0415

            rows = 1_000_000 if kind == "read-all" else 500_000
            table = read_lots(path, max_rows=rows)
            outcome = f"read {len(table.frame):,} lots"
    except InputError as err:
        outcome = "refused: " + str(err).split(": ", 1)[-1][:70]
    seconds = time.perf_counter() - t0
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # KiB -> MiB
    return {"seconds": seconds, "peak_mib": peak, "outcome": outcome}


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--case")
    ap.add_argument("--path")
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--timeout", type=float, default=900)
    ap.add_argument("--only", action="append")
    args = ap.parse_args()
    if args.case:
        result = run_case(args.case, Path(args.path))
        sys.stdout.flush()
        print("RESULT " + json.dumps(result))
        return
    print("| case | file | wall s | peak MiB | outcome |")
    print("|---|---|---|---|---|")
    with tempfile.TemporaryDirectory() as d:
        for name, (make, _) in CASES.items():
            if args.only and name not in args.only:
                continue
            path = make(Path(d), args.quick)
            size = f"{path.stat().st_size / 2**20:.1f} MB"
            env = {**os.environ, "PYTHONPATH": str(ROOT)}
            try:
                proc = subprocess.run([sys.executable, __file__, "--case", name, "--path",
                                       str(path)], capture_output=True, text=True, env=env,
                                      timeout=args.timeout)
                line = [x for x in proc.stdout.splitlines() if x.startswith("RESULT ")]
                if not line:
                    raise RuntimeError(proc.stderr[-300:])
                r = json.loads(line[-1][7:])
                print(f"| {name} | {size} | {r['seconds']:.1f} | {r['peak_mib']:.0f} | "
                      f"{r['outcome']} |", flush=True)
            except subprocess.TimeoutExpired:
                print(f"| {name} | {size} | > {args.timeout:.0f} | - | did not finish |",
                      flush=True)
            path.unlink()


if __name__ == "__main__":
    main()
