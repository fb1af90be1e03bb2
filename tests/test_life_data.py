"""Reading life data: spellings, the four kinds of observation, and every bad input."""

from __future__ import annotations

import math

import pytest

from qualbayes.data.life import (
    FAILURE,
    INTERVAL,
    LEFT,
    NO_GROUP,
    SUSPENSION,
    parse_status,
    parse_units,
    read_life,
)
from qualbayes.errors import InputError, OptionError


def write(tmp_path, text: str, name: str = "life.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


@pytest.mark.parametrize("raw,kind", [
    ("F", FAILURE), ("failed", FAILURE), ("Failure", FAILURE), ("1", FAILURE), (1, FAILURE),
    (1.0, FAILURE), ("S", SUSPENSION), ("suspended", SUSPENSION), ("Running", SUSPENSION),
    ("censored", SUSPENSION), ("0", SUSPENSION), (0, SUSPENSION), (" s ", SUSPENSION),
])
def test_status_spellings(raw, kind):
    assert parse_status(raw) == kind


@pytest.mark.parametrize("raw", ["X", "2", 2, "broken?", "maybe", -1])
def test_unknown_status_is_refused(raw):
    with pytest.raises(ValueError, match="status"):
        parse_status(raw)


def test_kinds_from_columns(tmp_path):
    p = write(tmp_path, "Serial,Hours,Status,Last Seen Working,Found Failed\n"
                        "A,100,F,,\n"
                        "B,250,S,,\n"
                        "C,,failed,300,400\n"
                        "D,,failed,,150\n"
                        "E,,failed,0,160\n"
                        "F,,running,520,\n"
                        "G,350,F,350,350\n")
    t = read_life(p)
    f = t.frame.set_index("unit")
    assert f.loc["A", "kind"] == FAILURE and f.loc["A", "lower"] == 100
    assert f.loc["B", "kind"] == SUSPENSION and math.isinf(f.loc["B", "upper"])
    assert (f.loc["C", "kind"], f.loc["C", "lower"], f.loc["C", "upper"]) == (INTERVAL, 300,
                                                                              400)
    assert f.loc["D", "kind"] == LEFT and f.loc["D", "upper"] == 150
    assert f.loc["E", "kind"] == LEFT
    assert f.loc["F", "kind"] == SUSPENSION and f.loc["F", "lower"] == 520
    assert f.loc["G", "kind"] == FAILURE  # a degenerate interval is an exact failure
    assert t.groups == [NO_GROUP]
    assert t.counts(NO_GROUP) == {"failure": 2, "suspension": 2, "interval": 1, "left": 2}
    assert list(f["row"]) == [2, 3, 4, 5, 6, 7, 8]


def test_groups_and_group_filter(tmp_path):
    p = write(tmp_path, "Unit,Time,Status,Design Revision\n1,10,F,A\n2,20,S,B\n3,30,F,A\n")
    t = read_life(p)
    assert t.groups == ["A", "B"]
    only = read_life(p, groups=["B"])
    assert list(only.frame["unit"]) == ["2"]


def test_units_label():
    assert parse_units(" cycles ") == "cycles"
    with pytest.raises(OptionError):
        parse_units("x" * 30)


def test_the_example_files_read(examples):
    rig = read_life(examples / "sv30_rig_test.xlsx")
    assert rig.groups == ["Rev B", "Rev C"] and rig.header_row == 2
    field = read_life(examples / "sv30_field_returns.csv")
    kinds = set(field.frame["kind"])
    assert {INTERVAL, LEFT, SUSPENSION} <= kinds
    zero = read_life(examples / "sv30_zero_failure.csv")
    assert (zero.frame["kind"] == SUSPENSION).all()


# ------------------------------------------------------------------ bad input, named exactly

BAD = [
    ("negative time", "Unit,Time,Status\nA,100,F\nB,-5,S\n", 3, "Time", "negative"),
    ("zero time", "Unit,Time,Status\nA,0,F\n", 2, "Time", "zero"),
    ("interval backwards", "Unit,Time,Status,Last Seen Working,Found Failed\nA,,F,500,400\n",
     2, "Last Seen Working", "backwards"),
    ("unknown status", "Unit,Time,Status\nA,10,F\nB,20,X\n", 3, "Status", "unknown status"),
    ("empty status", "Unit,Time,Status\nA,10,\n", 2, "Status", "empty"),
    ("text time", "Unit,Time,Status\nA,ten,F\n", 2, "Time", "expected a number"),
    ("empty failure time", "Unit,Time,Status\nA,,F\n", 2, "Time", "failure time is empty"),
    ("suspended but found failed",
     "Unit,Time,Status,Last Seen Working,Found Failed\nA,100,S,,120\n", 2, "Found Failed",
     "suspended"),
    ("time outside interval",
     "Unit,Time,Status,Last Seen Working,Found Failed\nA,900,F,300,400\n", 2, "Time",
     "outside"),
    ("duplicate unit", "Unit,Time,Status\nA,10,F\nA,20,S\n", 3, "Unit", "twice"),
    ("empty group", "Unit,Time,Status,Supplier\nA,10,F,Alder\nB,20,S,\n", 3, "Supplier",
     "group"),
    ("negative seen working",
     "Unit,Time,Status,Last Seen Working,Found Failed\nA,,F,-3,400\n", 2,
     "Last Seen Working", "negative"),
    ("zero found failed",
     "Unit,Time,Status,Last Seen Working,Found Failed\nA,,F,,0\n", 2, "Found Failed", "zero"),
    ("seen working after failure", "Unit,Time,Status,Last Seen Working\nA,100,F,150\n", 2,
     "Last Seen Working", "after the failure"),
]


@pytest.mark.parametrize("label,text,row,column,words", BAD, ids=[b[0] for b in BAD])
def test_bad_input_names_row_and_column(tmp_path, label, text, row, column, words):
    p = write(tmp_path, text)
    with pytest.raises(InputError) as info:
        read_life(p)
    err = info.value
    assert err.row == row and err.column == column and err.file == str(p)
    assert words in err.message


def test_missing_status_column(tmp_path):
    p = write(tmp_path, "Unit,Time\nA,10\n")
    with pytest.raises(InputError, match="missing column"):
        read_life(p)


def test_group_with_no_units(tmp_path):
    p = write(tmp_path, "Unit,Time,Status,Plant\nA,10,F,Dunmore\n")
    with pytest.raises(InputError, match="group 'Elsewhere' has no units"):
        read_life(p, groups=["Elsewhere"])


def test_no_units_below_header(tmp_path):
    p = write(tmp_path, "Unit,Time,Status\n,,\n")
    with pytest.raises(InputError, match="no units"):
        read_life(p)
