"""The column-wise paths of a very large lots batch give what the row-by-row paths give: the
plain-file reading of data/lot_table.py (the same frame and notes, and every fault still
worded by the row-by-row reading), the record's lot rows (evidence/lot_record.py), and the
run record's digest put together from its parts (evidence/run_record.py)."""

import datetime as dt
import hashlib

import numpy as np
import pandas as pd
import pytest

from qualbayes.data import lot_table
from qualbayes.errors import InputError
from qualbayes.evidence import lot_record, run_record
from qualbayes.evidence.jsonout import PlainRows, plain

HEAD = "Lot No.,Part Number,Supplier,Lot Qty,Qty Inspected,Nonconforming\n"


def _read_both(path, monkeypatch):
    fast = lot_table.read_lots(path)
    with monkeypatch.context() as m:
        m.setattr(lot_table, "_plain_lots", lambda table, loc: None)
        slow = lot_table.read_lots(path)
    return fast, slow


def test_plain_file_reads_as_row_by_row(tmp_path, monkeypatch):
    path = tmp_path / "lots.csv"
    rows = [f"L{i},P{i % 3},{'S1' if i % 2 else ''},{'' if i % 5 == 0 else 2000},"
            f"{80 + i},{i % 4}" for i in range(40)]
    path.write_text(HEAD + "\n".join(rows) + "\n")
    seen = []
    plain_lots = lot_table._plain_lots
    monkeypatch.setattr(lot_table, "_plain_lots",
                        lambda table, loc: seen.append(plain_lots(table, loc)) or seen[-1])
    fast = lot_table.read_lots(path)
    assert seen and seen[0] is not None  # the column-wise reading was used
    monkeypatch.setattr(lot_table, "_plain_lots", lambda table, loc: None)
    slow = lot_table.read_lots(path)
    pd.testing.assert_frame_equal(fast.frame, slow.frame)
    assert fast.notes == slow.notes and fast.skipped == slow.skipped == []
    assert fast.headers == slow.headers and fast.sha256 == slow.sha256


@pytest.mark.parametrize("body, words", [
    ("L1,P,S,2000,80,1\nL1,P,S,2000,80,0\n", "appears twice"),
    ("L1,P,S,2000,80,81\n", "exceed units inspected"),
    ("L1,P,S,50,80,1\n", "exceed the lot size"),
    ("L1,P,S,2000,0,0\n", "no units were inspected"),
    ("L1,P,S,2000,80,\nL2,P,S,2000,80,1\n", None),  # an open lot: left out, with its note
    ("L1,P,S,2000,80,1\nL2,P,S,2000,80,1\nL3,P,S,2000,80,1\nL4,P,S,2000,240,3\n", "totals"),
    ("Total,P,S,2000,80,1\n", "totals row"),
    ("L1,P,S,2000,8.0,1\n", None),  # not digits only: read row by row
    ("L1,P,S,2000,80,1\n  L2,P,S,2000,80,1\n", None),
])
def test_anything_not_plain_is_read_row_by_row(tmp_path, monkeypatch, body, words):
    path = tmp_path / "lots.csv"
    path.write_text(HEAD + body)
    if words is None:
        fast, slow = _read_both(path, monkeypatch)
        pd.testing.assert_frame_equal(fast.frame, slow.frame)
        assert fast.notes == slow.notes and fast.skipped == slow.skipped
        return
    with pytest.raises(InputError, match=words) as fast:
        lot_table.read_lots(path)
    with monkeypatch.context() as m:
        m.setattr(lot_table, "_plain_lots", lambda table, loc: None)
        with pytest.raises(InputError) as slow:
            lot_table.read_lots(path)
    assert str(fast.value) == str(slow.value)


def _row_by_row(frame):
    """The record's lot rows as they were built before, one row at a time."""
    def none(v):
        return None if v is None or (not isinstance(v, str) and pd.isna(v)) else v
    out = []
    for r in frame.to_dict("records"):
        out.append({
            "lot": r["lot"], "part": none(r["part"]), "supplier": none(r["supplier"]),
            "date": none(r["date"]), "row": r["row"], "lot_size": none(r["lot_size"]),
            "inspected": r["inspected"], "defectives": r["defectives"],
            "posterior_mean": none(r["posterior_mean"]),
            "interval": [none(r["interval_low"]), none(r["interval_high"])],
            "upper_bound": none(r["upper_bound"]),
            "prob_within_spec": none(r["prob_within_spec"]),
            "prob_within_spec_mcse": none(r["prob_within_spec_mcse"]),
            "prob_within_spec_error": none(r["prob_within_spec_error"]),
            "decision_basis": none(r["decision_basis"]), "decision": r["decision"],
            "too_close": bool(r["too_close"]) if none(r["too_close"]) is not None else None,
            "group": none(r["group"]),
            "outlier": bool(r["outlier"]) if none(r["outlier"]) is not None else None,
            "outlier_p": none(r["outlier_p"]), "own_data_prob": none(r["own_data_prob"]),
            "own_data_decision": none(r["own_data_decision"]),
            "extra_clean_units_to_accept": none(r["extra_clean_units_to_accept"]),
            "remaining_units": none(r["remaining_units"]),
            "remaining_defectives": {"median": none(r["remaining_defectives_median"]),
                                     "upper_bound": none(r["remaining_defectives_upper"])}})
    return plain(out)


def test_record_rows_column_wise_equal_row_by_row():
    k = 6
    frame = pd.DataFrame({
        "lot": [f"L{i}" for i in range(k)], "part": ["P", None, "P", np.nan, "Q", "Q"],
        "supplier": [None] * k, "date": [dt.date(2026, 1, i + 1) for i in range(k)],
        "lot_size": pd.array([2000, None, 800, 5000, None, 3200], "Int64"),
        "inspected": np.arange(50, 50 + k), "defectives": np.arange(k), "row": np.arange(k) + 2,
        "group": ["P", "(no part)", "P", "(no part)", "Q", "Q"],
        "posterior_mean": [0.01, np.nan, 0.02, np.inf, 0.0, 1e-9],
        "interval_low": np.linspace(0, 1, k), "interval_high": np.linspace(1, 2, k),
        "upper_bound": np.linspace(0, 0.1, k), "prob_within_spec": [0.5, 0.96, np.nan, 0.1,
                                                                    1.0, 0.0],
        "prob_within_spec_mcse": np.nan, "prob_within_spec_error": 1e-4,
        "decision_basis": ["lot", "process", "lot", "lot", "process", "lot"],
        "decision": np.array(["accept", "reject", "undecided"] * 2, dtype=object),
        "too_close": np.array([np.True_, False, None, True, False, np.False_], dtype=object),
        "outlier": np.array([False, True, None, False, np.True_, False], dtype=object),
        "outlier_p": [0.5, 0.01, np.nan, 0.2, 0.03, 1.0],
        "own_data_prob": np.linspace(0, 1, k), "own_data_decision": ["accept"] * k,
        "extra_clean_units_to_accept": pd.array([0, None, 12, 3, None, 0], "Int64"),
        "remaining_units": pd.array([1950, None, 747, 4947, None, 3145], "Int64"),
        "remaining_defectives_median": pd.array([1, None, 2, 3, None, 0], "Int64"),
        "remaining_defectives_upper": pd.array([5, None, 8, 9, None, 2], "Int64"),
    })
    got = lot_record._lot_rows(frame)
    want = _row_by_row(frame)
    assert got == want
    # plain() keeps the rows as they are, so every value must be plain already
    assert isinstance(got, PlainRows) and plain({"lots": got})["lots"] is got

    def leaves(v):
        if isinstance(v, dict):
            return [u for w in v.values() for u in leaves(w)]
        return [u for w in v for u in leaves(w)] if isinstance(v, list) else [v]
    kinds = {type(v) for row in got for v in leaves(row)}
    assert kinds <= {str, int, float, bool, type(None)}, kinds
    assert [list(r) for r in got] == [list(r) for r in want]  # the same key order
    assert run_record.canonical(got) == run_record.canonical(want)


def test_rows_marked_plain_that_are_not_cannot_be_sealed():
    """PlainRows skips plain(); the seal's canonical JSON still refuses what is not plain."""
    with pytest.raises(TypeError):
        run_record.seal({"kind": "lots", "lots": PlainRows([{"p": np.float32(0.5)}])})
    with pytest.raises(ValueError):
        run_record.seal({"kind": "lots", "lots": PlainRows([{"p": float("nan")}])})
    with pytest.raises(TypeError):
        run_record.seal({"kind": "lots", "lots": PlainRows([{"n": pd.NA}])})


def test_digest_from_parts_equals_the_digest_of_the_whole():
    body = plain({"kind": "lots", "lots": [{"lot": "A", "p": 0.5, "ü": [1, None]},
                                           {"lot": "B", "p": None}],
                  "notes": ["ä", "b"], "question": {"z": 1, "a": {"y": [], "b": {}}},
                  "groups": [], "empty": {}})
    got = run_record._digest_of(body)

    def sha(v):
        return hashlib.sha256(run_record.canonical(v)).hexdigest()
    keys = {}
    for key, value in body.items():
        keys[key] = sha(value)
        if key in run_record.ITEM_KEYS and isinstance(value, list):
            keys.update({f"{key}[{i}]": sha(item) for i, item in enumerate(value)})
    assert got["content"] == sha(body)
    assert got["keys"] == keys and list(got["keys"]) == list(keys)


@pytest.mark.parametrize("array", [
    np.array([[0.25, 1e-300], [3.0, -2.5]]), np.array([[1, 2], [3, 4]], dtype=np.int64),
    np.array([True, False]), np.array([1.5, np.nan, np.inf]), np.zeros((2, 0)),
    np.array([1.0, 2.0], dtype=np.float32), np.array(["a", "b"]),
])
def test_plain_arrays_take_the_short_way_and_equal_the_long_one(array):
    """Arrays of bools, integers and finite floats (the posterior draws of a record) become
    lists by ``tolist()`` alone; the result equals element-by-element conversion, with NaN
    and infinity still written as None."""
    import json

    def long_way(v):
        if isinstance(v, list):
            return [long_way(x) for x in v]
        return plain(v)

    got = plain(array)
    assert got == long_way(array.tolist())
    assert json.loads(json.dumps(got, allow_nan=False)) == got  # JSON-plain
