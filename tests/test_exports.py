"""Reading real plant exports (issue 15, item 1): header spellings of ERP and quality-system
exports, the columns not used, the sheet picked by its columns, rows without a result yet,
the status mapping for life data, and several files in one run."""

import hashlib
import json

import pandas as pd
import pytest
from helpers import write_csv, write_xlsx

from qualbayes.cli import main
from qualbayes.data.columns import EXPORT_SPELLINGS, normalise, spellings
from qualbayes.data.combine import parse_source, read_life_files, read_lots_files
from qualbayes.data.life import LIFE_COLUMNS, read_life
from qualbayes.data.lot_table import LOT_COLUMNS, read_lots
from qualbayes.data.status import StatusMap
from qualbayes.errors import InputError, OptionError

# ------------------------------------------------------------------ header spellings

#: (lot, inspected, defectives, lot size, part, supplier, date) as exports spell them
LOT_SPELLINGS = [
    ("Inspection lot", "Sample Qty", "Defective qty", "Received Qty", "Material No.",
     "Vendor No.", "Insp. start date"),
    ("Prüflos", "Stichprobenumfang", "Fehlerhafte Teile", "Losgröße", "Materialnummer",
     "Lieferant", "Prüfdatum"),
    ("Lot de contrôle", "Taille de l'échantillon", "Quantité défectueuse", "Quantité reçue",
     "Référence", "Fournisseur", "Date de contrôle"),
    ("INSP. LOT", "inspected_quantity", "NC Qty", "GR Qty", "Item No.", "Supplier Code",
     "Posting Date"),
    ("Charge", "Prüfmenge", "n.i.O.", "Liefermenge", "Sachnummer", "Lieferantenname",
     "Eingangsdatum"),
    ("N° de lot", "Qté contrôlée", "Pièces défectueuses", "Taille du lot", "Code article",
     "Nom du fournisseur", "Date de réception"),
]


@pytest.mark.parametrize("header", LOT_SPELLINGS, ids=[h[0] for h in LOT_SPELLINGS])
def test_lot_export_spellings_are_matched(tmp_path, header):
    rows = [["A-1", 50, 0, 500, "P-7", "Verano Teile", "2026-03-02"],
            ["A-2", 80, 2, 800, "P-7", "Verano Teile", "2026-03-09"]]
    t = read_lots(write_csv(tmp_path / "e.csv", list(header), rows))
    assert t.headers == dict(zip(["lot", "inspected", "defectives", "lot_size", "part",
                                  "supplier", "date"], header, strict=True))
    assert t.frame["inspected"].tolist() == [50, 80]
    assert t.frame["defectives"].tolist() == [0, 2]
    assert t.frame["lot_size"].tolist() == [500, 800]
    assert t.frame["date"].astype(str).tolist() == ["2026-03-02", "2026-03-09"]
    assert t.unused_columns == ()


LIFE_SPELLINGS = [
    ("Seriennummer", "Betriebsstunden", "Zustand", "Konstruktionsstand"),
    ("Numéro de série", "Heures de fonctionnement", "Statut", "Révision"),
    ("Unit serial", "Operating time", "Failure status", "Design rev"),
]


@pytest.mark.parametrize("header", LIFE_SPELLINGS, ids=[h[0] for h in LIFE_SPELLINGS])
def test_life_export_spellings_are_matched(tmp_path, header):
    t = read_life(write_csv(tmp_path / "l.csv", list(header),
                            [["U1", 120, "F", "B"], ["U2", 300, "S", "C"]]))
    assert t.headers == dict(zip(["unit", "time", "status", "group"], header, strict=True))
    assert t.groups == ["B", "C"]  # a "Design rev" column is taken as the group


@pytest.mark.parametrize("schema", [LOT_COLUMNS, LIFE_COLUMNS], ids=["lots", "life"])
def test_no_spelling_belongs_to_two_columns(schema):
    owner: dict[str, str] = {}
    for col in schema:
        for s in spellings(col):
            key = normalise(s)
            assert owner.setdefault(key, col.key) == col.key, (s, owner[key], col.key)
    assert set(EXPORT_SPELLINGS) <= {c.key for c in LOT_COLUMNS + LIFE_COLUMNS}


def test_columns_not_used_are_listed(tmp_path):
    p = write_csv(tmp_path / "e.csv", ["Inspection lot", "Sample Qty", "Defective qty",
                                       "Plant", "Inspector"], [["A", 50, 0, "W2", "kb"]])
    t = read_lots(p)
    assert t.unused_columns == ("Plant", "Inspector")
    assert any("columns not used: 'Plant', 'Inspector'" in n for n in t.notes)


# ------------------------------------------------------------------ the sheet picked

LOTS = [["Lot", "Inspected", "Defectives"], ["A", 50, 0], ["B", 80, 1]]


def _book(path, sheets):
    from openpyxl import Workbook

    wb = Workbook()
    wb.remove(wb.active)
    for name, rows in sheets.items():
        ws = wb.create_sheet(name)
        for r in rows:
            ws.append(r)
    wb.save(path)
    return path


def test_the_sheet_holding_the_columns_is_read(tmp_path):
    p = _book(tmp_path / "b.xlsx", {"Cover": [["Monthly quality export"], ["Plant 3"]],
                                    "Lots": [["Export of March"], *LOTS],
                                    "Legend": [["Column", "Meaning"], ["Lot", "id"]]})
    t = read_lots(p)
    assert t.sheet == "Lots" and t.frame["lot"].tolist() == ["A", "B"]
    assert t.frame["row"].tolist() == [3, 4]
    assert any("sheet 'Lots' read" in n and "'Cover', 'Lots', 'Legend'" in n for n in t.notes)


def test_no_sheet_with_the_columns_lists_the_sheets(tmp_path, capsys):
    p = _book(tmp_path / "b.xlsx", {"Cover": [["Export"]],
                                    "Data": [["Batch", "Qty", "Bad"], ["A", 50, 1]]})
    with pytest.raises(InputError, match=r"no sheet has the columns .*'Cover', 'Data'.*--sheet"):
        read_lots(p)
    assert main(["lots", str(p), "--spec", "1%"]) == 2
    assert "--sheet" in capsys.readouterr().err
    # the engineer names the sheet and its columns: read as asked
    t = read_lots(p, sheet="Data", columns="lot=Batch,inspected=Qty,defectives=Bad")
    assert t.sheet == "Data" and t.frame["defectives"].tolist() == [1]


def test_several_sheets_with_the_columns_are_listed(tmp_path):
    p = _book(tmp_path / "b.xlsx", {"2025": LOTS, "2026": LOTS, "Notes": [["x"]]})
    with pytest.raises(InputError, match=r"several sheets .*'2025', '2026'.*--sheet"):
        read_lots(p)
    assert read_lots(p, sheet="2026").sheet == "2026"


def test_one_visible_sheet_is_read_as_before(tmp_path):
    p = write_xlsx(tmp_path / "a.xlsx", LOTS[0], LOTS[1:], hidden_first=True)
    assert read_lots(p).sheet == "Inspection"


# ------------------------------------------------------------------ rows without a result

def test_open_lots_are_left_out_listed_and_counted(tmp_path, capsys):
    rows = [["A", 50, 0], ["B", 80, None], ["C", 50, 1], ["D", None, None], ["E", 125, 0]]
    p = write_csv(tmp_path / "e.csv", ["Lot", "Sample Qty", "Defective qty"], rows)
    t = read_lots(p)
    assert t.frame["lot"].tolist() == ["A", "C", "E"]
    assert [(s["row"], s["lot"]) for s in t.skipped] == [(3, "B"), (5, "D")]
    note = next(n for n in t.notes if "without a result" in n)
    assert note.startswith("2 row(s)") and "row 3 (lot B)" in note and "row 5 (lot D)" in note
    with pytest.raises(InputError, match="lot 'B' has no result yet") as info:
        read_lots(p, strict=True)
    assert info.value.row == 3
    out = tmp_path / "ev"
    assert main(["lots", str(p), "--spec", "2%", "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "row 3 (lot B)" in text and "3 lots" in text
    from openpyxl import load_workbook

    wb = load_workbook(out / "lot_decisions.xlsx")
    cautions = [c for row in wb["Cautions"].values for c in row if c]
    assert any("row 5 (lot D)" in str(c) for c in cautions)
    prov = [list(r) for r in wb["Provenance"].values]
    assert sum(r[0] == "row left out" for r in prov) == 2
    record = json.loads((out / "lot_decisions.json").read_text())
    assert [s["row"] for s in record["input"]["rows_skipped"]] == [3, 5]
    assert main(["lots", str(p), "--spec", "2%", "--strict"]) == 2
    assert "--strict" in capsys.readouterr().err


def test_a_count_without_its_sample_is_still_refused(tmp_path):
    p = write_csv(tmp_path / "e.csv", ["Lot", "Inspected", "Defects"], [["A", None, 1]])
    with pytest.raises(InputError, match="inspected is empty"):
        read_lots(p)


def test_units_without_a_result_are_left_out(tmp_path):
    p = write_csv(tmp_path / "l.csv", ["Unit", "Time", "Status"],
                  [["U1", 100, "F"], ["U2", None, None], ["U3", 250, "S"]])
    t = read_life(p)
    assert t.frame["unit"].tolist() == ["U1", "U3"]
    assert [(s["row"], s["unit"]) for s in t.skipped] == [(3, "U2")]
    with pytest.raises(InputError, match="unit 'U2' has no result yet"):
        read_life(p, strict=True)


# ------------------------------------------------------------------ status mapping

RETURNS = [["U1", 410, "Failed"], ["U2", 520, "Removed (NFF)"], ["U3", 600, "S"],
           ["U4", 700, "removed (nff)"], ["U5", 800, "Scrapped"]]


def test_status_mapping_changes_exactly_the_mapped_rows(tmp_path):
    p = write_csv(tmp_path / "r.csv", ["Unit", "Hours", "Status"], RETURNS)
    with pytest.raises(InputError, match="unknown status 'Removed"):
        read_life(p)
    m = StatusMap.parse(["Removed (NFF)=suspended", "Scrapped=failed"])
    t = read_life(p, status=m)
    assert dict(zip(t.frame["unit"], t.frame["kind"], strict=True)) == {
        "U1": "failure", "U2": "suspension", "U3": "suspension", "U4": "suspension",
        "U5": "failure"}
    assert "status 'Removed (NFF)' read as suspended: 2 units (rows 3, 5)" in t.notes
    assert "status 'Scrapped' read as failed: 1 unit (row 6)" in t.notes
    # the same file with the opposite mapping: only the mapped rows change
    t2 = read_life(p, status=StatusMap.parse(["Removed (NFF)=failed", "Scrapped=failed"]))
    changed = t.frame["kind"] != t2.frame["kind"]
    assert t.frame.loc[changed, "unit"].tolist() == ["U2", "U4"]


@pytest.mark.parametrize("bad", ["Removed", "X=broken", "=failed"])
def test_bad_status_mapping_is_refused(bad):
    with pytest.raises(OptionError, match="--status"):
        StatusMap.parse([bad])


def test_status_mapping_on_the_command_line(tmp_path, capsys):
    p = write_csv(tmp_path / "r.csv", ["Unit", "Hours", "Status"], RETURNS)
    args = ["life", str(p), "--mission", "500", "--target", "0.5", "--shape-prior", "1,4",
            "--status", "Removed (NFF)=suspended", "--status", "Scrapped=failed", "--json"]
    assert main(args) == 0
    record = json.loads(capsys.readouterr().out)
    assert any("read as suspended: 2 units" in n for n in record["input"]["notes"])


# ------------------------------------------------------------------ several files

def test_combined_files_equal_one_concatenated_file(tmp_path):
    head = ["Lot", "Supplier", "Inspected", "Defects"]
    a = [["A1", "Kestrel", 50, 0], ["A2", "Kestrel", 80, 1]]
    b = [["B1", "Varn", 125, 2], ["B2", "Varn", 50, 0], ["B3", "Varn", 32, 0]]
    pa = write_csv(tmp_path / "a.csv", head, a)
    pb = write_xlsx(tmp_path / "b.xlsx", head, b, title="Week 12",
                    extra_sheets={"Cover": [["export"]]})
    whole = read_lots(write_csv(tmp_path / "all.csv", head, a + b))
    both = read_lots_files([str(pa), f"{pb}:Week 12"])
    cols = ["lot", "part", "supplier", "date", "lot_size", "inspected", "defectives"]
    pd.testing.assert_frame_equal(both.frame[cols], whole.frame[cols])
    assert both.frame["source"].tolist() == [str(pa)] * 2 + [f"{pb}:Week 12"] * 3
    assert both.frame["row"].tolist() == [2, 3, 2, 3, 4]  # each file's own rows
    assert [s["sha256"] for s in both.sources] == [
        hashlib.sha256(p.read_bytes()).hexdigest() for p in (pa, pb)]


def test_a_lot_in_two_files_is_refused(tmp_path):
    pa = write_csv(tmp_path / "a.csv", ["Lot", "Inspected", "Defects"], [["A1", 50, 0]])
    pb = write_csv(tmp_path / "b.csv", ["Lot", "Inspected", "Defects"], [["A1", 50, 1]])
    with pytest.raises(InputError, match="appears in two inputs"):
        read_lots_files([str(pa), str(pb)])
    with pytest.raises(OptionError, match="given twice"):
        read_lots_files([str(pa), str(pa)])


def test_rig_and_field_sheets_together(tmp_path, capsys):
    p = _book(tmp_path / "sv.xlsx", {
        "Rig": [["Unit", "Cycles", "Status", "Group"], ["R1", 9000, "F", "rev B"],
                ["R2", 12000, "S", "rev B"]],
        "Field": [["Serial", "Cycles", "Status", "Group"], ["F1", 4000, "F", "rev B"],
                  ["F2", 7000, "Removed (NFF)", "rev B"]]})
    t = read_life_files([f"{p}:Rig", f"{p}:Field"],
                        status=StatusMap.parse(["Removed (NFF)=suspended"]))
    assert t.frame["source"].tolist() == [f"{p}:Rig"] * 2 + [f"{p}:Field"] * 2
    assert t.frame["kind"].tolist() == ["failure", "suspension", "failure", "suspension"]
    assert main(["lots", f"{p}:Rig", "--spec", "1%", "--sheet", "Rig"]) == 2
    assert "named twice" in capsys.readouterr().err


def test_several_files_on_the_command_line(tmp_path, capsys):
    head = ["Lot", "Inspected", "Defects"]
    pa = write_csv(tmp_path / "a.csv", head, [["A1", 50, 0]])
    pb = write_csv(tmp_path / "b.csv", head, [["B1", 80, 1]])
    assert main(["lots", str(pa), str(pb), "--spec", "2%", "--json"]) == 0
    record = json.loads(capsys.readouterr().out)
    assert [lot["source"] for lot in record["lots"]] == [str(pa), str(pb)]
    assert [s["file"] for s in record["input"]["sources"]] == [str(pa), str(pb)]
    assert len(record["input"]["sha256"]) == 64


def test_parse_source():
    assert parse_source("book.xlsx:Sheet 1") == ("book.xlsx", "Sheet 1")
    assert parse_source("book.csv") == ("book.csv", None)


def test_pipeline_protects_every_input_file_sheet_names_included(tmp_path):
    """Further exports and FILE:SHEET names reach the pipeline's input protection (checked
    before any output target), so no input can be written over."""
    import argparse

    from qualbayes.commands.pipeline import input_paths

    a, b = tmp_path / "a.xlsx", tmp_path / "b.csv"
    a.write_bytes(b"PK")
    b.write_text("x\n")
    args = argparse.Namespace(file=f"{a}:Lots", more=[str(b), f"{tmp_path / 'gone.csv'}:S"])
    assert input_paths(args) == [str(a), str(b)]
