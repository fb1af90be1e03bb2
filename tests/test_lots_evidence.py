"""Evidence workbook and run record of the lots command."""

import json

from helpers import write_csv

from qualbayes.cli import main
from qualbayes.provenance import sha256_file


def _rows():
    return [["=HYPERLINK(\"http://x\",\"click\")", 50, 0], ["@SUM(A1)", 80, 1],
            ["+1-2", 125, 0], ["-5", 60, 3], ["ok-lot", 200, 0]]


def test_workbook_sheets_fingerprint_and_formula_text_escaped(tmp_path, capsys):
    from openpyxl import load_workbook

    src = write_csv(tmp_path / "in.csv", ["Lot", "Inspected", "Defects"], _rows())
    before = src.read_bytes()
    out = tmp_path / "ev"
    assert main(["lots", str(src), "--spec", "2%", "--out", str(out)]) == 0
    capsys.readouterr()
    assert src.read_bytes() == before  # the input is never modified
    wb = load_workbook(out / "lot_decisions.xlsx")
    assert wb.sheetnames == ["Decisions", "Inputs as read", "Model and prior", "Diagnostics",
                             "Cautions", "Provenance"]
    lots = [c.value for c in wb["Decisions"]["A"][1:]]
    assert lots[0] == "'=HYPERLINK(\"http://x\",\"click\")"
    assert lots[1] == "'@SUM(A1)" and lots[2] == "'+1-2" and lots[3] == "'-5"
    assert lots[4] == "ok-lot"
    for row in wb.worksheets[0].iter_rows():
        for c in row:
            assert c.data_type != "f"  # no formula anywhere
    prov = {r[0].value: r[1].value for r in wb["Provenance"].iter_rows()}
    assert prov["SHA-256"] == sha256_file(src)
    assert prov["command"].startswith("qualbayes lots")
    assert "version numpy" in prov
    cautions = [r[0].value for r in wb["Cautions"].iter_rows()]
    assert cautions[0].startswith("CAUTION")
    assert any("ISO 2859-1" in c for c in cautions)
    record = json.loads((out / "lot_decisions.json").read_text())
    assert record["input"]["sha256"] == sha256_file(src)


def test_existing_output_is_not_overwritten_without_force(tmp_path, capsys):
    src = write_csv(tmp_path / "in.csv", ["Lot", "Inspected", "Defects"], [["A", 50, 0]])
    out = tmp_path / "ev"
    assert main(["lots", str(src), "--spec", "2%", "--out", str(out)]) == 0
    first = (out / "lot_decisions.xlsx").read_bytes()
    write_csv(src, ["Lot", "Inspected", "Defects"], [["A", 50, 5]])
    assert main(["lots", str(src), "--spec", "2%", "--out", str(out)]) == 3
    assert "refusing to overwrite" in capsys.readouterr().err
    assert (out / "lot_decisions.xlsx").read_bytes() == first
    assert main(["lots", str(src), "--spec", "2%", "--out", str(out), "--force"]) == 0
    assert (out / "lot_decisions.xlsx").read_bytes() != first
    assert not [p for p in out.iterdir() if p.name.endswith(".part")]


def test_same_input_and_seed_same_numbers_history(tmp_path, capsys, examples):
    docs = []
    for _ in range(2):
        assert main(["lots", str(examples / "incoming_inspection.csv"), "--spec", "1%",
                     "--prior", "history", "--seed", "7", "--json"]) == 0
        docs.append(json.loads(capsys.readouterr().out))
    assert docs[0]["lots"] == docs[1]["lots"]
    assert docs[0]["seed"] == 7
    assert all(d["passed"] for d in docs[0]["diagnostics"].values())
    # partial pooling: the clearly bad lot is still rejected; clean lots of a stable part
    # are accepted on less evidence than the uniform prior needs
    by_lot = {lot["lot"]: lot for lot in docs[0]["lots"]}
    assert by_lot["G-1108"]["decision"] == "reject"
    assert by_lot["A-1102"]["decision"] == "accept"


def test_terminal_shows_at_most_its_row_cap_and_counts_the_rest(monkeypatch):
    """A terminal of 200,000 rows helps nobody: the text shows TERMINAL_ROWS lots, says how
    many more there are, and the decision counts still cover every lot."""
    import pandas as pd

    import qualbayes.evidence.lot_record as lr
    from qualbayes.data.frames import lots_table
    from qualbayes.evidence.lot_record import lots_record, lots_text
    from qualbayes.lot_question import assess_lots

    monkeypatch.setattr(lr, "TERMINAL_ROWS", 3)
    frame = pd.DataFrame({"lot": [f"L{i}" for i in range(5)], "inspected": [50] * 5,
                          "defectives": [0, 1, 0, 2, 0]})
    table = lots_table(frame)
    record = lots_record(assess_lots(table, 0.05, 0.9, "uniform"), table, "0" * 64, "cmd", {})
    text = lots_text(record)
    assert "L2" in text and "L3" not in text and "L4" not in text
    assert "... and 2 more lots not shown here" in text
    assert sum(record["decision_counts"].values()) == 5


def test_the_report_says_how_many_draws_are_behind_each_p():
    from qualbayes.evidence.lot_report import draws_line

    assert draws_line([{"lot": "A"}, {"lot": "B", "prob_within_spec_draws": None}]) is None
    same = [{"lot": f"L{i}", "prob_within_spec_draws": 4000} for i in range(3)]
    assert draws_line(same) == "Draws behind each P (all chains): 4,000 for every lot."
    mixed = same + [{"lot": f"M{i}", "prob_within_spec_draws": 8000 + 4000 * (i % 2)}
                    for i in range(23)]
    line = draws_line(mixed)
    assert line.startswith("Draws behind each P (all chains): 4,000, except M0 (8,000), "
                           "M1 (12,000), ")
    assert "M19 (12,000) and 3 more: a close call" in line and "M20" not in line
