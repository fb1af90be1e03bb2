"""Reading spreadsheets (xlsx, csv) as untrusted input.

The result is a :class:`RawTable`: the cells of one sheet as Python values with the row
numbers the engineer sees in the spreadsheet. Nothing here knows what the columns mean.

Defences: a file-size limit, a limit on the unpacked size and packing ratio of an xlsx
(zip bombs), XML parsing through defusedxml (entity expansion), a row limit checked
before the whole sheet is read (and, for a csv, before any row is kept), a column limit,
and formula cells: their cached value is used, and a formula with no cached value is an
error (the tool never evaluates formulas). Whatever a damaged file makes the parsers raise
is reported as an :class:`InputError` naming the file, the sheet and the last row read.
"""

from __future__ import annotations

import hashlib
import io
import os
import re
import stat
import zipfile
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

from qualbayes.errors import InputError, OptionError

MAX_FILE_BYTES = 200 * 1024 * 1024
MAX_UNPACKED_BYTES = 1024 * 1024 * 1024
MAX_PACK_RATIO = 150
DEFAULT_MAX_ROWS = 500_000
#: Cells further right than this are refused: openpyxl pads every row to its last cell, so
#: a cell in column XFD (16,384) on every row would cost time and memory for nothing.
MAX_COLUMNS = 1024
#: Cells kept for one table (rows times the column of each row's last filled cell), checked
#: row by row before the next row is kept: 500,000 rows of 20 columns fit.
MAX_CELLS = 10_000_000


@dataclass
class RawTable:
    """Cells of one sheet. ``rows[i]`` was spreadsheet row ``row_numbers[i]``."""

    file: str
    sheet: str | None
    rows: list[list[object]]
    row_numbers: list[int]
    decimal_comma: bool = False
    formula_cells: dict[tuple[int, int], str] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    sha256: str = ""  # of exactly the bytes parsed

    def error(self, message: str, row: int | None = None, column: str | None = None):
        return InputError(message, file=self.file, sheet=self.sheet, row=row, column=column)


def read_table(path: str | os.PathLike, sheet: str | None = None,
               max_rows: int = DEFAULT_MAX_ROWS, pick_sheet=None) -> RawTable:
    """Read one sheet of an xlsx/xlsm file or a csv/txt file. ``pick_sheet(workbook, file)``
    chooses the worksheet when no sheet is named (default: the first visible one). A
    RawTable already in memory (a DataFrame's cells, :mod:`qualbayes.data.frames`) is
    returned as it is, so every reader validates a DataFrame exactly as a file."""
    if isinstance(path, RawTable):
        return path
    if isinstance(max_rows, bool) or not isinstance(max_rows, int) or max_rows < 1:
        raise OptionError(f"--max-rows {max_rows!r}: give a whole number of at least 1")
    p = Path(path)
    name = str(path)
    data = _read_bytes(p, name)
    sha = hashlib.sha256(data).hexdigest()
    head = data[:8]
    suffix = p.suffix.lower()
    if head.startswith(b"PK"):
        if sheet is None and suffix in (".csv", ".txt"):
            raise InputError("the file is named .csv but is a zip/xlsx file", file=name)
        table = _read_xlsx(io.BytesIO(data), name, sheet, max_rows, pick_sheet)
    else:
        if suffix in (".xlsx", ".xlsm"):
            raise InputError("not a valid xlsx file (it is not a zip archive; truncated or "
                             "another format?)", file=name)
        if suffix == ".xls" or head.startswith(b"\xd0\xcf\x11\xe0"):
            raise InputError("old binary .xls files are not read; save the sheet as .xlsx or "
                             ".csv", file=name)
        if sheet is not None:
            raise InputError("--sheet applies to xlsx files only", file=name)
        from qualbayes.data.csv_table import read_csv_bytes  # noqa: PLC0415

        table = read_csv_bytes(data, name, max_rows)
    table.sha256 = sha
    return table


def _read_bytes(p: Path, name: str) -> bytes:
    """The file's bytes, read once (they are hashed and parsed from memory, so the
    fingerprint is of exactly what was read). Opened without blocking and checked to be a
    regular file after opening, so a FIFO or device put in its place is never read."""
    try:
        fd = os.open(p, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
    except FileNotFoundError:
        raise InputError("file not found", file=name) from None
    except IsADirectoryError:
        raise InputError("not a regular file", file=name) from None
    except OSError as err:
        raise InputError(f"cannot read the file ({err.strerror or err})", file=name) from None
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            raise InputError("not a regular file", file=name)
        if st.st_size == 0:
            raise InputError("the file is empty", file=name)
        if st.st_size > MAX_FILE_BYTES:
            raise InputError(f"the file is {st.st_size / 2**20:.0f} MiB; the limit is "
                             f"{MAX_FILE_BYTES // 2**20} MiB", file=name)
        with os.fdopen(os.dup(fd), "rb") as fh:
            data = fh.read(st.st_size + 1)  # no larger buffer than the file
    except OSError as err:
        raise InputError(f"cannot read the file ({err.strerror or err})", file=name) from None
    finally:
        os.close(fd)
    if len(data) > min(st.st_size, MAX_FILE_BYTES):
        raise InputError("the file changed while it was being read; read it again", file=name)
    if not data:
        raise InputError("the file is empty", file=name)
    return data


# ----------------------------------------------------------------------------- xlsx

def _check_zip(p, name: str) -> None:
    try:
        with zipfile.ZipFile(p) as zf:
            infos = zf.infolist()
    except (zipfile.BadZipFile, OSError) as err:
        raise InputError(f"not a valid xlsx file ({err}); is it truncated?", file=name) from None
    total = sum(i.file_size for i in infos)
    if total > MAX_UNPACKED_BYTES:
        raise InputError(
            f"the xlsx unpacks to {total / 2**20:.0f} MiB, over the limit of "
            f"{MAX_UNPACKED_BYTES // 2**20} MiB (a zip bomb?)", file=name)
    for i in infos:
        if i.file_size > 10 * 2**20 and i.compress_size > 0 and (
                i.file_size / i.compress_size > MAX_PACK_RATIO):
            raise InputError(
                f"xlsx part {i.filename!r} is packed {i.file_size // i.compress_size}:1, "
                "which no real export is (a zip bomb?)", file=name)


def _open_workbook(p, name: str, data_only: bool):
    import openpyxl  # noqa: PLC0415 - heavy, only for xlsx
    import openpyxl.xml  # noqa: PLC0415

    if not openpyxl.xml.DEFUSEDXML:
        raise InputError("refusing to read xlsx without defusedxml installed", file=name)
    try:
        return openpyxl.load_workbook(p, read_only=True, data_only=data_only, keep_links=False)
    except InputError:
        raise
    except Exception as err:  # openpyxl raises many kinds on broken files
        raise _damaged(err, name) from None


def _damaged(err: BaseException, name: str, sheet: str | None = None,
             last_row: int | None = None) -> InputError:
    """The InputError for whatever a parser raised on a damaged or hostile workbook."""
    if _is_entity_error(err):
        return InputError("the xlsx contains XML entity declarations, which are refused "
                          "(an XML bomb?)", file=name, sheet=sheet)
    kind = type(err).__name__
    text = str(err).split("\n")[0][:160]
    where = f" after row {last_row}" if last_row else ""
    if sheet is None:
        return InputError(f"cannot read the xlsx file ({kind}: {text}); is it damaged?",
                          file=name)
    return InputError(f"the sheet cannot be read{where} ({kind}: {text}); is the file "
                      "damaged? Open it in a spreadsheet program and save it again",
                      file=name, sheet=sheet)


def _is_entity_error(err: BaseException | None) -> bool:
    """defusedxml's EntitiesForbidden / DTDForbidden, possibly wrapped by openpyxl."""
    for _ in range(10):
        if err is None:
            return False
        kind = type(err).__name__
        if "Entit" in kind or "DTD" in kind or "Forbidden" in kind:
            return True
        err = err.__cause__ or err.__context__
    return False


def _pick_sheet(wb, name: str, sheet: str | None, pick_sheet=None):
    if sheet is None and pick_sheet is not None:
        return pick_sheet(wb, name)
    if sheet is not None:
        if sheet not in wb.sheetnames:
            raise InputError(f"no sheet named {sheet!r}; the sheets are "
                             f"{', '.join(repr(s) for s in wb.sheetnames)}", file=name)
        return wb[sheet]
    for ws in wb.worksheets:
        if getattr(ws, "sheet_state", "visible") == "visible":
            return ws
    raise InputError("the workbook has no visible worksheet; name one with --sheet", file=name)


def _too_many_rows(name: str, sheet: str, max_rows: int, declared: str = "") -> InputError:
    return InputError(f"the sheet has more than {max_rows:,} data rows{declared}; split the "
                      "file or raise the limit with --max-rows", file=name, sheet=sheet)


def _sparse_rows(ws, data_only: bool) -> Iterator[tuple[int, list[dict]]]:
    """(row number, the cells present in the row's XML) from openpyxl's streaming sheet
    parser: nothing is padded, so a cell far to the right costs one entry, not a row of
    empty cells (openpyxl's read-only rows pad every row to the widest)."""
    from openpyxl.worksheet._reader import WorkSheetParser  # noqa: PLC0415

    wb = ws.parent
    with ws._get_source() as src:
        parser = WorkSheetParser(src, ws._shared_strings, data_only=data_only,
                                 epoch=wb.epoch, date_formats=wb._date_formats,
                                 timedelta_formats=wb._timedelta_formats)
        yield from parser.parse()


def _iter_limited(ws, name: str, sheet: str, max_rows: int, progress: list[int],
                  data_only: bool = True) -> Iterator[tuple[int, list[dict]]]:
    """Rows as (row number, sparse cells), within the row, column and cell limits.
    ``progress[0]`` holds the last row number read.

    The sheet's size record (its ``dimension``) is used only to refuse an oversized sheet at
    once; rows are numbered by their own ``r`` attributes, so a wrong record can neither cut
    rows off nor pad them.
    """
    declared = ws.max_row
    if declared is not None and declared > max_rows + 1:
        raise _too_many_rows(name, sheet, max_rows, f" (its size record says {declared:,} "
                                                    "rows)")
    kept = 0
    last = 0
    for k, cells in _sparse_rows(ws, data_only):
        if k <= last:
            raise InputError(f"row {k} comes after row {last} in the sheet's XML; the file is "
                             "damaged. Open it in a spreadsheet program and save it again",
                             file=name, sheet=sheet, row=k)
        last = k
        if k > max_rows + 1:  # the header is one row
            raise _too_many_rows(name, sheet, max_rows)
        width = max((c["column"] for c in cells if c["value"] is not None
                     or c["data_type"] == "f"), default=0)
        if width > MAX_COLUMNS:
            from openpyxl.utils import get_column_letter  # noqa: PLC0415

            raise InputError(
                f"a cell lies in column {get_column_letter(min(width, 16384))} "
                f"(column {width:,}); at most {MAX_COLUMNS:,} columns are read. Delete the "
                "cells right of the table or copy the table into a new sheet",
                file=name, sheet=sheet, row=k)
        kept += width
        if kept > MAX_CELLS:
            raise too_many_cells(name, sheet, k)
        progress[0] = k
        yield k, cells


def too_many_cells(name: str, sheet: str | None, row: int) -> InputError:
    return InputError(f"the table holds more than {MAX_CELLS:,} cells by row {row:,} (rows "
                      "times the column of their last filled cell); delete cells far right "
                      "of the table, or split the file", file=name, sheet=sheet, row=row)


def trimmed(values: list[object]) -> list[object]:
    while values and values[-1] is None:
        values.pop()
    return values


def _values(cells: list[dict]) -> list[object]:
    width = max((c["column"] for c in cells if c["value"] is not None), default=0)
    values: list[object] = [None] * width
    for c in cells:
        if c["value"] is not None and c["column"] <= width:
            values[c["column"] - 1] = c["value"]
    return values


def _read_xlsx(p, name: str, sheet: str | None, max_rows: int,
               pick_sheet=None) -> RawTable:
    _check_zip(p, name)
    wb = _open_workbook(p, name, data_only=True)
    title: str | None = None
    progress = [0]
    try:
        ws = _pick_sheet(wb, name, sheet, pick_sheet)
        title = ws.title
        rows: list[list[object]] = []
        numbers: list[int] = []
        for k, cells in _iter_limited(ws, name, title, max_rows, progress):
            values = _values(cells)
            if not any(v is not None and v != "" for v in values):
                continue
            numbers.append(k)
            rows.append(values)
    except InputError:
        raise
    except Exception as err:  # a damaged sheet part: broken XML, bad CRC, odd cell values
        raise _damaged(err, name, title or sheet, progress[0]) from None
    finally:
        wb.close()
    table = RawTable(name, title, rows, numbers)
    if _has_formulas(p, name):
        _find_formulas(p, name, title, table, max_rows)
    return table


_FORMULA_TAG = re.compile(rb"<(?:[A-Za-z_][\w.-]*:)?f[\s/>]")


def _has_formulas(p, name: str) -> bool:
    """Whether any XML part holds a formula element (a cheap streaming scan, so that the
    second, formula-keeping read is made only for workbooks that have formulas)."""
    try:
        with zipfile.ZipFile(p) as zf:
            for info in zf.infolist():
                if not info.filename.endswith(".xml"):
                    continue
                with zf.open(info) as fh:
                    tail = b""
                    while chunk := fh.read(1 << 20):
                        if _FORMULA_TAG.search(tail + chunk):
                            return True
                        tail = chunk[-64:]
    except Exception as err:  # noqa: BLE001 - bad CRC or a damaged stream
        raise _damaged(err, name) from None
    return False


def _find_formulas(p, name: str, title: str, table: RawTable, max_rows: int) -> None:
    """Record formula cells (row, col) -> formula text, from a second, formula-keeping read.

    Cached values were read already; a formula whose cached value is missing is reported by
    the column validators as "formula with no saved value" when its column is used.
    """
    wb = _open_workbook(p, name, data_only=False)
    progress = [0]
    try:
        ws = wb[title]
        index = {r: i for i, r in enumerate(table.row_numbers)}
        for k, cells in _iter_limited(ws, name, title, max_rows, progress, data_only=False):
            for c in cells:
                if c["data_type"] == "f":
                    j = c["column"] - 1
                    if k not in index:
                        # a formula in a row whose cached values are all empty
                        index[k] = len(table.rows)
                        table.rows.append([None] * (j + 1))
                        table.row_numbers.append(k)
                    table.formula_cells[(index[k], j)] = str(c["value"])[:60]
    except InputError:
        raise
    except Exception as err:
        raise _damaged(err, name, title, progress[0]) from None
    finally:
        wb.close()
    order = sorted(range(len(table.rows)), key=table.row_numbers.__getitem__)
    if order != list(range(len(order))):  # rows added above: keep the sheet's order
        where = {old: new for new, old in enumerate(order)}
        table.rows = [table.rows[i] for i in order]
        table.row_numbers = [table.row_numbers[i] for i in order]
        table.formula_cells = {(where[i], j): f for (i, j), f in table.formula_cells.items()}
