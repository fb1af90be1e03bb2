"""Incoming-inspection tables: one row per lot."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from qualbayes.data.columns import (
    Column,
    cell,
    locate,
    number_style,
    parse_mapping,
    unused_note,
)
from qualbayes.data.notes import leave_out, skipped_note
from qualbayes.data.readers import DEFAULT_MAX_ROWS, RawTable
from qualbayes.data.sheets import read_sheet
from qualbayes.data.values import describe, is_blank, parse_count, parse_date, parse_text
from qualbayes.errors import InputError

LOT_COLUMNS: tuple[Column, ...] = (
    Column("lot", ("Lot", "Lot ID", "Lot No.", "Lot Number", "Lot #", "Batch", "Batch ID",
                   "Lot Nr")),
    Column("inspected", ("Inspected", "Sample Size", "Qty Inspected", "n", "Sample",
                         "Units Inspected", "Sampled", "Qty Sampled", "Quantity Inspected")),
    Column("defectives", ("Defectives", "Defects", "Nonconforming", "Non-conforming",
                          "Rejects", "Rejected", "Defective", "Failures", "Qty Rejected",
                          "Fails", "x", "X")),
    Column("lot_size", ("Lot Size", "Lot Qty", "Lot Quantity", "Qty Received", "Received",
                        "N", "Batch Size"), required=False),
    Column("part", ("Part", "Part No.", "Part Number", "Part ID", "Item", "Material", "PN"),
           required=False),
    Column("supplier", ("Supplier", "Vendor", "Supplier Name", "Vendor Name"),
           required=False),
    Column("date", ("Date", "Inspection Date", "Received Date", "Receipt Date", "Date Received"),
           required=False),
)


@dataclass
class LotTable:
    """Validated lots, with where they came from."""

    frame: pd.DataFrame  # lot, part, supplier, date, lot_size, inspected, defectives, row
    file: str
    sheet: str | None
    header_row: int
    headers: dict[str, str]  # key -> header as written in the file
    notes: list[str]
    sha256: str = ""  # of exactly the bytes read ("" for a table built in memory)
    #: rows left out because the lot has no result yet: {"row", "lot", "reason"}
    skipped: list[dict] = field(default_factory=list)
    unused_columns: tuple[str, ...] = ()  # headers in the file that were not read
    #: with several input files: {"file", "sheet", "sha256", "header_row", "lots"} each
    sources: list[dict] = field(default_factory=list)


def read_lots(path, sheet: str | None = None, columns: str | dict | None = None,
              max_rows: int = DEFAULT_MAX_ROWS, strict: bool = False) -> LotTable:
    """Read and validate an inspection export; raises :class:`InputError` on the first fault.

    A lot whose defectives cell is blank has no result yet (an open inspection lot): it is
    left out and listed in ``skipped`` and the notes, or refused when ``strict``. Defectives
    given with units inspected blank is an error (a count without its sample)."""
    mapping = parse_mapping(columns) if isinstance(columns, str | type(None)) else dict(columns)
    table = read_sheet(path, LOT_COLUMNS, mapping, sheet, max_rows)
    return validate_lots(table, mapping, strict=strict)


def validate_lots(table: RawTable, mapping: dict[str, str] | None = None,
                  strict: bool = False) -> LotTable:
    loc = locate(table, LOT_COLUMNS, mapping)
    headers = {k: v[1] for k, v in loc.columns.items()}
    frame = _plain_lots(table, loc)
    if frame is not None:  # every cell plain: the rows below would read them the same way
        notes = [*table.notes, *unused_note(loc.unused)]
        return LotTable(frame, table.file, table.sheet, loc.header_row, headers, notes,
                        table.sha256, [], loc.unused)
    style = number_style(table, loc, ("inspected", "defectives", "lot_size"))
    records = []
    skipped: list[dict] = []
    seen: dict[str, int] = {}
    for i in range(loc.first_data, len(table.rows)):
        rownum = table.row_numbers[i]

        def fail(msg: str, key: str, rownum: int = rownum) -> InputError:
            return table.error(msg, row=rownum, column=headers.get(key, key))

        def get(key: str, i: int = i):
            return cell(table, loc, i, key)

        lot_raw = get("lot")
        _refuse_totals_row(table, loc, i, lot_raw, fail)
        if is_blank(lot_raw):
            if all(is_blank(get(k)) for k in ("inspected", "defectives")):
                continue  # a trailing note or a spacer row
            raise fail("lot id is empty", "lot")
        try:
            lot = parse_text(lot_raw)
        except ValueError as err:
            raise fail(str(err), "lot") from None
        if lot in seen:
            raise fail(f"lot id {lot!r} appears twice (rows {seen[lot]} and {rownum})", "lot")
        seen[lot] = rownum
        if is_blank(get("defectives")):  # an open lot: sampled, perhaps, but no result yet
            leave_out(skipped, strict=strict, fail=fail, label="lot", ident=lot, row=rownum,
                      blank="defectives blank", column="defectives")
            continue
        counts = {}
        for key in ("inspected", "defectives", "lot_size"):
            raw = get(key)
            if is_blank(raw):
                if key == "lot_size":
                    counts[key] = None
                    continue
                raise fail(f"{key} is empty", key)
            try:
                value = parse_count(raw, style)
            except ValueError as err:
                raise fail(str(err), key) from None
            if value < 0:
                raise fail(f"{key} is negative ({describe(raw)})", key)
            counts[key] = value
        n, x, big_n = counts["inspected"], counts["defectives"], counts["lot_size"]
        if n == 0:
            raise fail("no units were inspected (0); remove the row or give the sample size",
                       "inspected")
        if x > n:
            raise fail(f"defectives ({x}) exceed units inspected ({n})", "defectives")
        if big_n is not None and n > big_n:
            raise fail(f"units inspected ({n}) exceed the lot size ({big_n})", "inspected")
        part = _optional_text(get("part"), fail, "part")
        supplier = _optional_text(get("supplier"), fail, "supplier")
        date = None
        if not is_blank(get("date")):
            try:
                date = parse_date(get("date"))
            except ValueError as err:
                raise fail(str(err), "date") from None
        records.append((lot, part, supplier, date, big_n, n, x, rownum))
    if not records:
        what = f" ({len(skipped)} open lots left out)" if skipped else ""
        raise table.error(f"no lots found below the header{what}", row=loc.header_row)
    _refuse_arithmetic_total(table, records, headers)
    notes = [*table.notes, *([style.note()] if style.note() else []), *unused_note(loc.unused),
             *skipped_note(skipped, "lot")]
    frame = pd.DataFrame.from_records(
        records, columns=["lot", "part", "supplier", "date", "lot_size", "inspected",
                          "defectives", "row"])
    frame["lot_size"] = frame["lot_size"].astype("Int64")
    return LotTable(frame, table.file, table.sheet, loc.header_row, headers, notes,
                    table.sha256, skipped, loc.unused)


def _plain_text(v) -> bool:
    """A cell that :func:`parse_text` returns unchanged (plain printable ASCII, no
    surrounding spaces, no error-value look) and that is no totals label."""
    return (type(v) is str and 0 < len(v) <= 200 and v.isascii() and v.isprintable()
            and v == v.strip() and not v.startswith(("#", "N/", "n/"))
            and " ".join(v.split()).casefold().rstrip(":") not in TOTAL_LABELS)


def _digits(v) -> bool:
    return type(v) is str and v.isascii() and v.isdigit() and len(v) <= 15


def _blank_text(v) -> bool:
    return v is None or (type(v) is str and v.strip() == "")


def _every(check, cells: list) -> bool:
    """``all(map(check, cells))`` over the distinct cells, for checks that give equal cells
    the same answer: a text cell equals only itself, and the checks here are False for every
    number, boolean and date (which may compare equal to each other: 1 == 1.0 == True)."""
    return all(map(check, set(cells)))


def _plain_lots(table: RawTable, loc) -> pd.DataFrame | None:
    """The lots frame read column by column when every cell is plain (lot ids and labels
    plain ASCII text, counts written as digits only, no blank lot or result, no date, no
    formula): what the row-by-row validation gives for such a file, checked as a whole
    (repeated ids, counts out of order, a totals row). None whenever any cell or check is
    not plain: the rows are then read one by one, which words every fault."""
    rows = table.rows[loc.first_data:]
    if not rows or table.formula_cells or table.decimal_comma:
        return None

    def column(key):
        if key not in loc.columns:
            return None
        j = loc.columns[key][0]
        return [r[j] if j < len(r) else None for r in rows]

    lots, n, x, size = column("lot"), column("inspected"), column("defectives"), column(
        "lot_size")
    # counts, sizes and labels repeat: their checks look at the distinct cells (_every)
    if not (all(map(_plain_text, lots)) and _every(_digits, n) and _every(_digits, x)):
        return None
    dates = column("date")
    if dates is not None and not _every(_blank_text, dates):
        return None
    labels = {}
    for key in ("part", "supplier"):
        values = column(key)
        if values is None:
            labels[key] = [None] * len(rows)
            continue
        if not _every(lambda v: _blank_text(v) or _plain_text(v), values):
            return None
        labels[key] = [None if _blank_text(v) else v for v in values]
    n_arr = np.array(n, dtype=np.int64)
    x_arr = np.array(x, dtype=np.int64)
    if size is None:
        size_arr = pd.array([None] * len(rows), dtype="Int64")
    elif _every(_digits, size):
        size_arr = pd.array(np.array(size, dtype=np.int64), dtype="Int64")
    elif _every(lambda v: _digits(v) or _blank_text(v), size):
        miss = np.array([_blank_text(v) for v in size])
        vals = np.array([0 if m else int(v) for v, m in zip(size, miss, strict=True)],
                        dtype=np.int64)
        size_arr = pd.arrays.IntegerArray(vals, miss)
    else:
        return None
    big_n = size_arr.to_numpy(dtype=np.int64, na_value=np.iinfo(np.int64).max)
    if ((n_arr == 0).any() or (x_arr > n_arr).any() or (n_arr > big_n).any()
            or len(set(lots)) != len(lots)):
        return None
    if len(rows) >= 4 and n_arr[-1] == n_arr[:-1].sum() and x_arr[-1] == x_arr[:-1].sum():
        return None  # a totals row: refused, with its words, by the row-by-row reading
    return pd.DataFrame({"lot": lots, "part": labels["part"], "supplier": labels["supplier"],
                         "date": [None] * len(rows), "lot_size": size_arr,
                         "inspected": n_arr, "defectives": x_arr,
                         "row": np.array(table.row_numbers[loc.first_data:], dtype=np.int64)})


#: Lot ids that label a summary row rather than a lot, in the languages of plant exports
#: (common practice in exports; no source). Compared case-folded, spaces collapsed.
TOTAL_LABELS = frozenset({
    "total", "totals", "grand total", "subtotal", "sub-total", "sum", "overall", "all lots",
    "sum total", "total lots",
    "summe", "gesamt", "gesamtsumme", "zwischensumme", "insgesamt", "alle lose",  # de
    "total général", "total general", "sous-total", "somme", "tous les lots",  # fr, es
    "totale", "totale generale", "subtotale", "somma",  # it
    "suma", "suma total", "subtotal general", "todos los lotes",  # es
    "totaal", "subtotaal", "som",  # nl
    "razem", "suma częściowa", "ogółem",  # pl
    "celkem", "součet", "összesen", "összeg",  # cs, hu
    "summa", "yhteensä", "i alt", "totalt", "samtals",  # sv, fi, da, no, is
    "итого", "всего", "сумма",  # ru
    "toplam", "σύνολο", "合計", "小計", "总计", "合计", "小计", "總計", "합계", "총계",
})
_TOTAL_FORMULAS = ("=SUM(", "=SUBTOTAL(", "=AGGREGATE(")


def _refuse_totals_row(table: RawTable, loc, i: int, lot_raw, fail) -> None:
    """A totals row counted as a lot would double the evidence: refuse it by name."""
    for key in ("inspected", "defectives") if table.formula_cells else ():
        j = loc.columns[key][0]
        formula = table.formula_cells.get((i, j), "")
        if formula.upper().replace(" ", "").startswith(_TOTAL_FORMULAS):
            raise fail(f"the cell holds {formula!r}, a total over other rows, not a lot's "
                       "count; delete the totals row", key)
    if isinstance(lot_raw, str) and " ".join(lot_raw.split()).casefold().rstrip(":") in (
            TOTAL_LABELS):
        raise fail(f"lot id {lot_raw.strip()!r} looks like a totals row, not a lot; delete "
                   "the row", "lot")


def _optional_text(raw, fail, key: str) -> str | None:
    if is_blank(raw):
        return None
    try:
        return parse_text(raw)
    except ValueError as err:
        raise fail(str(err), key) from None


def _refuse_arithmetic_total(table: RawTable, records: list, headers: dict) -> None:
    """The last row is a totals row when its units inspected and defectives equal the sums
    over all the rows above it (at least three): counted as a lot it would double the
    evidence, whatever its label says."""
    if len(records) < 4:
        return
    *others, last = records
    n_sum = sum(r[5] for r in others)
    x_sum = sum(r[6] for r in others)
    if last[5] == n_sum and last[6] == x_sum:
        raise table.error(
            f"lot {last[0]!r} has {last[5]:,} units inspected and {last[6]:,} defectives, "
            f"exactly the sums over the {len(others)} rows above it: a totals row, not a lot. "
            "Delete the row (a real lot that happens to match is safer listed above the others)",
            row=last[7], column=headers.get("inspected", "inspected"))
