"""Read what was written, or refuse (issue 12, items 3, 5 and 7): the silent misreads found by
hostile testing, bounded reading of wide and padded files, and escaped terminal output.

Rules under test are stated in qualbayes/data/numbers.py; the totals labels and spreadsheet
error values are common practice in plant exports (no source).
"""

from __future__ import annotations

import contextlib
import io
import tracemalloc
from pathlib import Path

import pytest
from helpers import write_csv
from hostile_files import deadline, sheet_xml, xlsx_with_sheet

from qualbayes.cli import main
from qualbayes.data.life import read_life
from qualbayes.data.lot_table import read_lots
from qualbayes.data.readers import MAX_CELLS, read_table
from qualbayes.errors import InputError

HEADER = ["Lot", "Inspected", "Defects"]
LIFE = ["Unit", "Hours", "Status"]


def refused(reader, path: Path, fragment: str, row=None, column=None) -> InputError:
    with pytest.raises(InputError) as info:
        reader(path)
    err = info.value
    assert fragment in str(err), str(err)
    if row is not None:
        assert err.row == row, str(err)
    if column is not None:
        assert err.column == column, str(err)
    return err


# ------------------------------------------------------------------ numbers

def test_life_hours_with_dots_are_refused_unless_the_file_tells(tmp_path):
    """A semicolon export with "9.000" and "12.159" h (dots grouping thousands) was read as
    9 h and 12.159 h and gave a confident does-not-meet."""
    p = write_csv(tmp_path / "life.csv", LIFE, [["U1", "9.000", "F"], ["U2", "12.159", "F"],
                                                ["U3", "15.000", "S"]], delimiter=";")
    refused(read_life, p, "'9.000' could be 9 or 9,000", row=2, column="Hours")
    code = main(["life", str(p), "--mission", "5000", "--target", "0.9"])
    assert code == 2
    q = write_csv(tmp_path / "life2.csv", LIFE, [["U1", "9.000", "F"], ["U2", "12.159", "F"],
                                                 ["U3", "15.000,5", "S"]], delimiter=";")
    t = read_life(q)
    assert t.frame["lower"].tolist() == [9000.0, 12159.0, 15000.5]
    assert any("decimal comma" in n and "'15.000,5'" in n for n in t.notes)


def test_one_rule_for_lots_and_life_and_conflicts_are_named(tmp_path):
    p = write_csv(tmp_path / "mixed.csv", [*HEADER, "Lot Size"],
                  [["A", 50, 0, "2,5"], ["B", 50, 0, "12.5"]])
    refused(read_lots, p, "writes numbers two ways")
    q = write_csv(tmp_path / "mixed_life.csv", LIFE, [["U1", "1,5", "F"], ["U2", "2.5", "F"]],
                  delimiter=";")
    refused(read_life, q, "writes numbers two ways")


@pytest.mark.parametrize("value,ok", [(9007199254740992, True), (9007199254740993, False),
                                      ("9007199254740993", False)])
def test_integers_beyond_2_53_are_refused(tmp_path, value, ok):
    p = write_csv(tmp_path / "big.csv", HEADER, [["A", value, 0]])
    if ok:
        assert read_lots(p).frame["inspected"].tolist() == [value]
    else:
        refused(read_lots, p, "beyond 2**53", row=2, column="Inspected")
    q = xlsx_with_sheet(tmp_path, "big.xlsx", sheet_xml([HEADER, ["A", value, 0]]))
    if ok:
        assert read_lots(q).frame["inspected"].tolist() == [value]
    else:
        refused(read_lots, q, "beyond 2**53", row=2)


# ------------------------------------------------------------------ labels and rows

@pytest.mark.parametrize("lot", ["L\u200b1", "L\u200e1", "L\u200f1", "L\ufeff1", "L\u00ad1",
                                 "L\u20601"])
def test_invisible_format_characters_in_ids_are_refused(tmp_path, lot):
    """Two lot ids that print identically ("L1" and "L<ZWSP>1") were two lots."""
    p = write_csv(tmp_path / "cf.csv", HEADER, [["L1", 50, 0], [lot, 50, 1]])
    refused(read_lots, p, f"U+{ord(lot[1]):04X}", row=3, column="Lot")
    q = write_csv(tmp_path / "cf_life.csv", LIFE, [["U1", 100, "F"], [lot, 120, "F"]])
    refused(read_life, q, "format character", row=3, column="Unit")


@pytest.mark.parametrize("error", ["#N/A", "#REF!", "#VALUE!", "#DIV/0!", "#NAME?", "#NULL!",
                                   "#NUM!"])
def test_spreadsheet_error_values_are_not_labels(tmp_path, error):
    p = write_csv(tmp_path / "err.csv", HEADER, [["A", 50, 0], [error, 50, 1]])
    refused(read_lots, p, f"spreadsheet error value {error!r}", row=3, column="Lot")
    q = write_csv(tmp_path / "part.csv", ["Lot", "Part", "Inspected", "Defects"],
                  [["A", "P-1", 50, 0], ["B", error, 50, 1]])
    refused(read_lots, q, "spreadsheet error value", row=3, column="Part")


@pytest.mark.parametrize("label", ["Summe", "Total général", "合計", "All lots", "GESAMT",
                                   "Итого", "Totale:", "grand  total"])
def test_totals_rows_in_the_languages_of_plant_exports(tmp_path, label):
    p = write_csv(tmp_path / "tot.csv", HEADER, [["A", 50, 0], ["B", 80, 2], [label, 7, 1]])
    refused(read_lots, p, "looks like a totals row", row=4, column="Lot")


def test_totals_row_recognised_by_its_arithmetic(tmp_path):
    rows = [["A", 50, 0], ["B", 80, 2], ["C", 125, 1], ["Σ Q3", 255, 3]]
    p = write_csv(tmp_path / "sum.csv", HEADER, rows)
    refused(read_lots, p, "exactly the sums over the 3 rows above it", row=5)
    rows[-1] = ["D", 255, 2]  # a real lot whose counts differ from the sums
    assert read_lots(write_csv(tmp_path / "ok.csv", HEADER, rows)).frame["lot"].size == 4


@pytest.mark.parametrize("date,ok", [("2026-01-05", True), ("2026-01-05 08:30", True),
                                     ("2026-01-05T08:30:00Z", True),
                                     ("2026-01-05 garbage", False), ("2026-01-05x", False),
                                     ("2026-01-05 08:30 or so", False)])
def test_dates_must_parse_whole(tmp_path, date, ok):
    p = write_csv(tmp_path / "d.csv", [*HEADER, "Date"], [["A", 50, 0, date]])
    if ok:
        assert str(read_lots(p).frame["date"].iloc[0]) == "2026-01-05"
    else:
        refused(read_lots, p, "", row=2, column="Date")


# ------------------------------------------------------------------ bounded resources

def test_a_csv_line_of_millions_of_commas_is_refused_in_bounded_memory(tmp_path):
    """One 188 MB line of commas reached 4 GB; here 24 MB, refused before splitting."""
    p = tmp_path / "wide.csv"
    with open(p, "w", encoding="utf-8") as fh:
        fh.write("Lot,Inspected,Defects\nA,50,0" + "," * (24 * 2**20) + "\nB,50,1\n")
    size = p.stat().st_size
    tracemalloc.start()
    try:
        with deadline(60):
            err = refused(read_table, p, "at most 1,024 columns are read", row=2)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert "Traceback" not in str(err)
    assert peak < 6 * size, (peak, size)  # the bytes and the text, never a list of cells


def test_a_padded_xlsx_is_refused_without_padding_rows(tmp_path):
    """One cell far to the right on every row took 43 s and 552 MB (openpyxl pads each row
    to the widest): rows are now read sparse and the cell budget is checked row by row."""
    far = "ALL"  # column 1,000
    body = ['<row r="1"><c r="A1" t="inlineStr"><is><t>Lot</t></is></c><c r="B1" '
            't="inlineStr"><is><t>Inspected</t></is></c><c r="C1" t="inlineStr"><is><t>Defects'
            f'</t></is></c><c r="{far}1"><v>0</v></c></row>']
    body += [f'<row r="{k}"><c r="A{k}"><v>{k}</v></c><c r="B{k}"><v>50</v></c><c r="C{k}">'
             f'<v>0</v></c><c r="{far}{k}"><v>1</v></c></row>' for k in range(2, 12_002)]
    xml = ('<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
           f'<sheetData>{"".join(body)}</sheetData></worksheet>').encode()
    p = xlsx_with_sheet(tmp_path, "padded.xlsx", xml)
    tracemalloc.start()
    try:
        with deadline(60):
            refused(read_table, p, f"more than {MAX_CELLS:,} cells")
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 400 * 2**20, peak


def test_wide_rows_without_a_header_are_refused_quickly(tmp_path):
    p = tmp_path / "noheader.csv"
    with open(p, "w", encoding="utf-8") as fh:
        for i in range(3000):
            fh.write(",".join(f"v{i}_{j}" for j in range(200)) + "\n")
    with deadline(30):
        refused(read_lots, p, "missing column(s)")


# ------------------------------------------------------------------ terminal

def test_escape_sequences_in_names_are_printed_escaped(tmp_path):
    """A crafted file name cleared the screen and printed a green 'ALL LOTS ACCEPTED'."""
    name = "in\x1b[2J\x1b[32mALL LOTS ACCEPTED\x1b[0m\u202e.csv"
    p = write_csv(tmp_path / name, HEADER, [["A", 50, 0]])
    for extra in ([], ["--json"], ["--spec", "oops"]):
        out, err = io.StringIO(), io.StringIO()
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            code = main(["lots", str(p), "--spec", "2%", *extra])
        text = out.getvalue() + err.getvalue()
        assert code in (0, 2)
        assert "\x1b" not in text and "\u202e" not in text, extra
        if "--spec" not in extra:  # the name is printed, escaped
            assert "\\x1b" in text or "\\u001b" in text
