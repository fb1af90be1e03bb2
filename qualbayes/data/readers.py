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

import csv
import io
import os
import re
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
#: Delimiter detection looks at this many records of the start of a csv.
_SNIFF_RECORDS = 30


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

    def error(self, message: str, row: int | None = None, column: str | None = None):
        return InputError(message, file=self.file, sheet=self.sheet, row=row, column=column)


def read_table(path: str | os.PathLike, sheet: str | None = None,
               max_rows: int = DEFAULT_MAX_ROWS, pick_sheet=None) -> RawTable:
    """Read one sheet of an xlsx/xlsm file or a csv/txt file. ``pick_sheet(workbook, file)``
    chooses the worksheet when no sheet is named (default: the first visible one)."""
    if isinstance(max_rows, bool) or not isinstance(max_rows, int) or max_rows < 1:
        raise OptionError(f"--max-rows {max_rows!r}: give a whole number of at least 1")
    p = Path(path)
    name = str(path)
    try:
        if not p.exists():
            raise InputError("file not found", file=name)
        if not p.is_file():
            raise InputError("not a regular file", file=name)
        size = p.stat().st_size
        if size == 0:
            raise InputError("the file is empty", file=name)
        if size > MAX_FILE_BYTES:
            raise InputError(
                f"the file is {size / 2**20:.0f} MiB; the limit is {MAX_FILE_BYTES // 2**20} MiB",
                file=name)
        with open(p, "rb") as fh:
            head = fh.read(8)
    except OSError as err:
        raise InputError(f"cannot read the file ({err.strerror or err})", file=name) from None
    suffix = p.suffix.lower()
    if head.startswith(b"PK"):
        if sheet is None and suffix in (".csv", ".txt"):
            raise InputError("the file is named .csv but is a zip/xlsx file", file=name)
        return _read_xlsx(p, name, sheet, max_rows, pick_sheet)
    if suffix in (".xlsx", ".xlsm"):
        raise InputError("not a valid xlsx file (it is not a zip archive; truncated or "
                         "another format?)", file=name)
    if suffix == ".xls" or head.startswith(b"\xd0\xcf\x11\xe0"):
        raise InputError("old binary .xls files are not read; save the sheet as .xlsx or .csv",
                         file=name)
    if sheet is not None:
        raise InputError("--sheet applies to xlsx files only", file=name)
    return _read_csv(p, name, max_rows)


# ----------------------------------------------------------------------------- xlsx

def _check_zip(p: Path, name: str) -> None:
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


def _open_workbook(p: Path, name: str, data_only: bool):
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


def _iter_limited(ws, name: str, sheet: str, max_rows: int,
                  progress: list[int]) -> Iterator[tuple[int, tuple]]:
    """Rows as (row number, cells). ``progress[0]`` holds the last row number read.

    The sheet's size record (its ``dimension``) is used only to refuse an oversized sheet at
    once; then it is dropped, so a wrong record can neither cut rows off nor pad them.
    """
    declared = ws.max_row
    if declared is not None and declared > max_rows + 1:
        raise _too_many_rows(name, sheet, max_rows, f" (its size record says {declared:,} "
                                                    "rows)")
    ws.reset_dimensions()
    # Without a size record openpyxl numbers the rows it yields from 1, filling gaps with
    # empty rows, so k is the spreadsheet's row number even when column A is empty.
    for k, row in enumerate(ws.iter_rows(), start=1):
        if k > max_rows + 1:  # the header is one row
            raise _too_many_rows(name, sheet, max_rows)
        if len(row) > MAX_COLUMNS:
            from openpyxl.utils import get_column_letter  # noqa: PLC0415

            raise InputError(
                f"a cell lies in column {get_column_letter(min(len(row), 16384))} "
                f"(column {len(row):,}); at most {MAX_COLUMNS:,} columns are read. Delete the "
                "cells right of the table or copy the table into a new sheet",
                file=name, sheet=sheet, row=k)
        progress[0] = k
        yield k, row


def _trimmed(values: list[object]) -> list[object]:
    while values and values[-1] is None:
        values.pop()
    return values


def _read_xlsx(p: Path, name: str, sheet: str | None, max_rows: int,
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
        for k, row in _iter_limited(ws, name, title, max_rows, progress):
            values = _trimmed([getattr(c, "value", None) for c in row])
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


def _has_formulas(p: Path, name: str) -> bool:
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


def _find_formulas(p: Path, name: str, title: str, table: RawTable, max_rows: int) -> None:
    """Record formula cells (row, col) -> formula text, from a second, formula-keeping read.

    Cached values were read already; a formula whose cached value is missing is reported by
    the column validators as "formula with no saved value" when its column is used.
    """
    wb = _open_workbook(p, name, data_only=False)
    progress = [0]
    try:
        ws = wb[title]
        index = {r: i for i, r in enumerate(table.row_numbers)}
        for k, row in _iter_limited(ws, name, title, max_rows, progress):
            for j, c in enumerate(row):
                if getattr(c, "data_type", None) == "f":
                    if k not in index:
                        # a formula in a row whose cached values are all empty
                        index[k] = len(table.rows)
                        table.rows.append([None] * (j + 1))
                        table.row_numbers.append(k)
                    table.formula_cells[(index[k], j)] = str(c.value)[:60]
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


# ----------------------------------------------------------------------------- csv

def _decode(data: bytes, name: str) -> tuple[str, str]:
    if data.startswith(b"\xef\xbb\xbf"):
        return _decode_utf8(data[3:], name), "utf-8 (BOM)"
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        try:
            return data.decode("utf-16"), "utf-16"
        except UnicodeDecodeError:
            raise InputError("the file starts with a UTF-16 mark but is not UTF-16",
                             file=name) from None
    try:
        return data.decode("utf-8"), "utf-8"
    except UnicodeDecodeError as err:
        if _has_utf8_multibyte(data):
            line = data[: err.start].count(b"\n") + 1
            raise InputError(
                f"mixed text encodings: valid UTF-8 elsewhere but byte 0x{data[err.start]:02x} "
                "here is not; save the file again as UTF-8", file=name, row=line) from None
        return data.decode("cp1252", errors="replace"), "cp1252"


def _decode_utf8(data: bytes, name: str) -> str:
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as err:
        line = data[: err.start].count(b"\n") + 1
        raise InputError(f"byte 0x{data[err.start]:02x} is not UTF-8 although the file "
                         "starts with a UTF-8 mark; save it again as UTF-8",
                         file=name, row=line) from None


def _has_utf8_multibyte(data: bytes) -> bool:
    import re  # noqa: PLC0415

    return re.search(rb"[\xc2-\xf4][\x80-\xbf]+", data) is not None and _valid_pairs(data)


def _valid_pairs(data: bytes) -> bool:
    import re  # noqa: PLC0415

    for m in re.finditer(rb"[\xc2-\xdf][\x80-\xbf]|[\xe0-\xef][\x80-\xbf]{2}", data):
        try:
            m.group().decode("utf-8")
            return True
        except UnicodeDecodeError:
            continue
    return False


def _guess_delimiter(text: str) -> str:
    """The delimiter that splits the first records into the most consistent number of
    fields (at least two). Linear in the sample; csv.Sniffer's patterns can take minutes on
    one long line, so it is not used."""
    best, best_score = ",", (0, 0)
    for delimiter in (",", ";", "\t", "|"):
        counts: dict[int, int] = {}
        try:
            reader = csv.reader(io.StringIO(text[:65536], newline=""), delimiter=delimiter)
            for k, rec in enumerate(reader):
                if k >= _SNIFF_RECORDS:
                    break
                if any(c.strip() for c in rec):
                    counts[len(rec)] = counts.get(len(rec), 0) + 1
        except csv.Error:
            continue
        wide = {n: c for n, c in counts.items() if n >= 2}
        if not wide:
            continue
        fields, freq = max(wide.items(), key=lambda item: (item[1], item[0]))
        if (freq, fields) > best_score:
            best, best_score = delimiter, (freq, fields)
    return best


def _records(text: str, delimiter: str, name: str) -> Iterator[tuple[int, list[str]]]:
    """Non-blank records with the line number each starts on."""
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter, quotechar='"')
    start = 1
    try:
        for rec in reader:
            if any(c.strip() for c in rec):
                yield start, rec
            start = reader.line_num + 1
    except csv.Error as err:
        raise InputError(f"csv syntax error: {err}", file=name, row=reader.line_num) from None


def _read_csv(p: Path, name: str, max_rows: int) -> RawTable:
    try:
        data = p.read_bytes()
    except OSError as err:
        raise InputError(f"cannot read the file ({err.strerror or err})", file=name) from None
    if b"\x00" in data[:4096] and not data.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise InputError("this is a binary file, not csv text", file=name)
    text, encoding = _decode(data, name)
    del data
    delimiter = _guess_delimiter(text)
    if text.count("\n") > max_rows:
        # Possibly too long: count the records first, keeping none of them, so that a file
        # of millions of rows is refused without building a table of them.
        for k, (line, _) in enumerate(_records(text, delimiter, name)):
            if k > max_rows:
                raise _too_many_csv_rows(name, max_rows, line)
    rows: list[list[object]] = []
    numbers: list[int] = []
    for line, rec in _records(text, delimiter, name):
        if len(rows) > max_rows:
            raise _too_many_csv_rows(name, max_rows, line)
        rows.append([c if c.strip() else None for c in rec])
        numbers.append(line)
    table = RawTable(name, None, rows, numbers, decimal_comma=delimiter in ";\t|")
    if encoding == "cp1252":
        table.notes.append("read as Windows-1252 text (not UTF-8)")
    return table


def _too_many_csv_rows(name: str, max_rows: int, line: int) -> InputError:
    return InputError(f"the file has more than {max_rows:,} data rows (line {line:,} is "
                      "past the limit); split the file or raise the limit with --max-rows",
                      file=name)
