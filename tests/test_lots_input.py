"""Reading inspection exports: header spellings, mapping, and every bad-input case.

Each bad input must exit with status 2, name the file, sheet, row and column, and write
nothing."""

import json

import pytest
from helpers import GOOD_ROWS, LOT_HEADER, write_csv, write_xlsx

from qualbayes.cli import main
from qualbayes.data.lot_table import read_lots
from qualbayes.errors import InputError


def run_cli(args, capsys):
    code = main(args)
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.mark.parametrize("lot,insp,defs", [
    ("Lot", "Sample Size", "Defectives"), ("lot id", "inspected", "defects"),
    ("LOT NO.", "Qty. Inspected", "Non-conforming"), ("Lot #", "n", "Rejects"),
    ("  Lot ID ", "QTY_INSPECTED", "nonconforming")])
def test_header_spellings_are_recognised(tmp_path, lot, insp, defs):
    p = write_csv(tmp_path / "a.csv", [lot, insp, defs], [["A", 50, 0], ["B", 80, 2]])
    t = read_lots(p)
    assert list(t.frame["lot"]) == ["A", "B"]
    assert list(t.frame["inspected"]) == [50, 80]
    assert list(t.frame["defectives"]) == [0, 2]


def test_explicit_column_mapping(tmp_path):
    p = write_csv(tmp_path / "a.csv", ["Batch Code", "Checked", "Bad"], [["A", 50, 1]])
    with pytest.raises(InputError, match="missing column"):
        read_lots(p)
    t = read_lots(p, columns="lot=Batch Code,inspected=Checked,defectives=Bad")
    assert t.frame.iloc[0][["lot", "inspected", "defectives"]].tolist() == ["A", 50, 1]


def test_title_rows_above_header_hidden_sheet_and_sheet_option(tmp_path):
    p = write_xlsx(tmp_path / "a.xlsx", LOT_HEADER, GOOD_ROWS, title_row="Export of July",
                   hidden_first=True, extra_sheets={"Other": [LOT_HEADER, GOOD_ROWS[0]]})
    # two visible sheets hold lot columns: no guess, the sheets are listed (issue 15)
    with pytest.raises(InputError, match="several sheets .*'Inspection', 'Other'.*--sheet"):
        read_lots(p)
    t = read_lots(p, sheet="Inspection")
    assert t.sheet == "Inspection" and t.header_row == 2 and len(t.frame) == 3
    assert t.frame["row"].tolist() == [3, 4, 5]
    assert len(read_lots(p, sheet="Other").frame) == 1
    with pytest.raises(InputError, match="no sheet named 'Nope'"):
        read_lots(p, sheet="Nope")


def test_semicolon_csv_with_bom_and_thousands_separators(tmp_path):
    # "12.000" alone could be twelve or twelve thousand: with no other number telling the
    # decimal mark, it is refused with its row and column (issue 12: never guess)
    p = tmp_path / "eu.csv"
    p.write_bytes("\ufeffLot;Lot Size;Inspected;Defects\nA;\"12.000\";315;0\nB;1 250;125;1\n"
                  .encode())
    with pytest.raises(InputError, match="could be 12 or 12,000") as info:
        read_lots(p)
    assert info.value.row == 2 and info.value.column == "Lot Size"
    # "1.250.000" can only group thousands with dots: the file's decimal mark is the comma
    q = tmp_path / "eu2.csv"
    q.write_bytes("\ufeffLot;Lot Size;Inspected;Defects\nA;\"12.000\";315;0\nB;1 250;125;1\n"
                  "C;1.250.000;315;0\n".encode())
    t = read_lots(q)
    assert t.frame["lot_size"].tolist() == [12000, 1250, 1250000]
    assert any("decimal comma" in n and "'1.250.000' in row 4" in n for n in t.notes)


def test_windows_1252_csv_is_read(tmp_path):
    p = tmp_path / "w.csv"
    p.write_bytes("Lot,Supplier,Inspected,Defects\nA,Müller GmbH,50,0\n".encode("cp1252"))
    t = read_lots(p)
    assert t.frame["supplier"].iloc[0] == "Müller GmbH"
    assert any("1252" in n for n in t.notes)


BAD_CASES = [
    # (rows, header, message fragment, row, column)
    ([["A", 50, 0], ["B", "fifty", 1]], None, "expected a number", 3, "Qty Inspected"),
    ([["A", 50, 0], ["B", 50, -1]], None, "negative", 3, "Nonconforming"),
    ([["A", 50, 0], ["B", 50, 51]], None, "exceed units inspected", 3, "Nonconforming"),
    ([["A", 50, 0], ["A", 50, 1]], None, "appears twice", 3, "Lot No."),
    ([["A", 50, 0], ["B", 50.5, 1]], None, "whole number", 3, "Qty Inspected"),
    ([["A", 50, 0], ["B", None, 1]], None, "is empty", 3, "Qty Inspected"),
    ([["A", 0, 0]], None, "no units were inspected", 2, "Qty Inspected"),
]


@pytest.mark.parametrize("kind", ["csv", "xlsx"])
@pytest.mark.parametrize("rows,header,fragment,row,column", BAD_CASES)
def test_bad_values_exit_2_naming_the_place_and_write_nothing(tmp_path, capsys, kind, rows,
                                                              header, fragment, row, column):
    header = header or ["Lot No.", "Qty Inspected", "Nonconforming"]
    writer = write_csv if kind == "csv" else write_xlsx
    p = writer(tmp_path / f"bad.{kind}", header, rows)
    out = tmp_path / "out"
    code, stdout, err = run_cli(["lots", str(p), "--spec", "1%", "--out", str(out)], capsys)
    assert code == 2
    assert fragment in err
    assert f"row {row}" in err and f"column {column!r}" in err and str(p) in err
    if kind == "xlsx":
        assert "sheet 'Inspection'" in err
    assert not out.exists()
    assert stdout == ""


def test_inspected_above_lot_size(tmp_path, capsys):
    p = write_csv(tmp_path / "a.csv", ["Lot", "Lot Size", "Inspected", "Defects"],
                  [["A", 100, 125, 0]])
    code, _, err = run_cli(["lots", str(p), "--spec", "1%"], capsys)
    assert code == 2 and "exceed the lot size" in err and "column 'Inspected'" in err


def test_missing_column_and_empty_sheet_and_no_rows(tmp_path, capsys):
    p = write_csv(tmp_path / "a.csv", ["Lot", "Inspected"], [["A", 50]])
    code, _, err = run_cli(["lots", str(p), "--spec", "1%"], capsys)
    assert code == 2 and "missing column(s): defectives" in err
    e = write_xlsx(tmp_path / "e.xlsx", None, [])
    code, _, err = run_cli(["lots", str(e), "--spec", "1%"], capsys)
    assert code == 2 and "the sheet is empty" in err
    h = write_csv(tmp_path / "h.csv", ["Lot", "Inspected", "Defects"], [])
    code, _, err = run_cli(["lots", str(h), "--spec", "1%"], capsys)
    assert code == 2 and "no lots found" in err


def test_formula_without_cached_value_is_refused(tmp_path, capsys):
    # openpyxl writes formulas without a cached result, as a never-opened export would be
    p = write_xlsx(tmp_path / "f.xlsx", ["Lot", "Inspected", "Defects"],
                   [["A", 50, 0], ["B", "=20+30", 1]])
    code, _, err = run_cli(["lots", str(p), "--spec", "1%"], capsys)
    assert code == 2 and "has no saved value" in err and "row 3" in err


def test_formula_with_cached_value_uses_the_value(tmp_path):
    # Write a formula cell together with a cached value, as a spreadsheet program saves it.
    import zipfile

    p = write_xlsx(tmp_path / "f.xlsx", ["Lot", "Inspected", "Defects"],
                   [["A", 50, 0], ["B", "=20+30", 1]])
    q = tmp_path / "g.xlsx"
    with zipfile.ZipFile(p) as zin, zipfile.ZipFile(q, "w", zipfile.ZIP_DEFLATED) as zout:
        for item in zin.infolist():
            data = zin.read(item.filename)
            if item.filename == "xl/worksheets/sheet1.xml":
                data = data.replace(b"<f>20+30</f><v></v>", b"<f>20+30</f><v>50</v>")
                data = data.replace(b"<f>20+30</f><v />", b"<f>20+30</f><v>50</v>")
                assert b"<v>50</v>" in data
            zout.writestr(item, data)
    t = read_lots(q)
    assert t.frame["inspected"].tolist() == [50, 50]


def test_bad_options_exit_2(tmp_path, capsys):
    p = write_csv(tmp_path / "a.csv", ["Lot", "Inspected", "Defects"], [["A", 50, 0]])
    for opts in (["--spec", "150%"], ["--spec", "1%", "--confidence", "1.2"],
                 ["--spec", "1%", "--prior", "beta:0,3"]):
        code, _, err = run_cli(["lots", str(p), *opts], capsys)
        assert code == 2, opts
        assert "nothing was written" in err


def test_missing_file_and_wrong_format(tmp_path, capsys):
    code, _, err = run_cli(["lots", str(tmp_path / "none.xlsx"), "--spec", "1%"], capsys)
    assert code == 2 and "file not found" in err
    bad = tmp_path / "trunc.xlsx"
    bad.write_bytes(b"PK\x03\x04garbage")
    code, _, err = run_cli(["lots", str(bad), "--spec", "1%"], capsys)
    assert code == 2 and "not a valid xlsx" in err


def test_json_document_keys(tmp_path, capsys, examples):
    code, out, _ = run_cli(["lots", str(examples / "incoming_inspection.csv"), "--spec", "1%",
                            "--json"], capsys)
    assert code == 0
    doc = json.loads(out)
    for key in ("model", "prior", "seed", "diagnostics", "lots", "caution", "input"):
        assert key in doc
    lot = doc["lots"][0]
    for key in ("lot", "inspected", "defectives", "posterior_mean", "interval", "upper_bound",
                "prob_within_spec", "decision", "extra_clean_units_to_accept"):
        assert key in lot
    assert len(lot["interval"]) == 2
    assert doc["caution"].startswith("CAUTION")
    assert len(doc["input"]["sha256"]) == 64


def test_terminal_output_carries_the_caution(capsys, examples):
    code, out, _ = run_cli(["lots", str(examples / "incoming_inspection.xlsx"), "--spec",
                            "1%"], capsys)
    assert code == 0
    assert "CAUTION: decision support only" in out
    assert "G-1108" in out and "reject" in out
