"""Reading spreadsheets (xlsx, csv) as untrusted input.

The result is a :class:`RawTable`: the cells of one sheet as Python values with the row
numbers the engineer sees in the spreadsheet. Nothing here knows what the columns mean.

Defences: a file-size limit, a limit on the unpacked size and packing ratio of an xlsx
(zip bombs), XML parsing through defusedxml (entity expansion), a row limit checked
before the whole sheet is read, and formula cells: their cached value is used, and a
formula with no cached value is an error (the tool never evaluates formulas).
"""

from __future__ import annotations

import csv
import io
import os
import zipfile
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

from qualbayes.errors import InputError

MAX_FILE_BYTES = 200 * 1024 * 1024
MAX_UNPACKED_BYTES = 1024 * 1024 * 1024
MAX_PACK_RATIO = 150
DEFAULT_MAX_ROWS = 500_000


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
               max_rows: int = DEFAULT_MAX_ROWS) -> RawTable:
    """Read one sheet of an xlsx/xlsm file or a csv/txt file."""
    p = Path(path)
    name = str(path)
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
    suffix = p.suffix.lower()
    if head.startswith(b"PK"):
        if sheet is None and suffix in (".csv", ".txt"):
            raise InputError("the file is named .csv but is a zip/xlsx file", file=name)
        return _read_xlsx(p, name, sheet, max_rows)
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
        kind = type(err).__name__
        if "Entit" in kind or "DTD" in kind or "Forbidden" in kind:
            raise InputError("the xlsx contains XML entity declarations, which are refused "
                             "(an XML bomb?)", file=name) from None
        raise InputError(f"cannot read the xlsx file ({kind}: {err})", file=name) from None


def _pick_sheet(wb, name: str, sheet: str | None):
    if sheet is not None:
        if sheet not in wb.sheetnames:
            raise InputError(f"no sheet named {sheet!r}; the sheets are "
                             f"{', '.join(repr(s) for s in wb.sheetnames)}", file=name)
        return wb[sheet]
    for ws in wb.worksheets:
        if getattr(ws, "sheet_state", "visible") == "visible":
            return ws
    raise InputError("the workbook has no visible worksheet; name one with --sheet", file=name)


def _iter_limited(ws, name: str, sheet: str, max_rows: int) -> Iterator[tuple[int, tuple]]:
    for k, row in enumerate(ws.iter_rows(), start=1):
        if k > max_rows + 1:  # the header is one row
            raise InputError(f"the sheet has more than {max_rows:,} data rows; split the file "
                             "or raise the limit with --max-rows", file=name, sheet=sheet)
        yield k, row


def _read_xlsx(p: Path, name: str, sheet: str | None, max_rows: int) -> RawTable:
    _check_zip(p, name)
    wb = _open_workbook(p, name, data_only=True)
    try:
        ws = _pick_sheet(wb, name, sheet)
        title = ws.title
        rows: list[list[object]] = []
        numbers: list[int] = []
        for _, row in _iter_limited(ws, name, title, max_rows):
            values = [getattr(c, "value", None) for c in row]
            if not any(v is not None and v != "" for v in values):
                continue
            rownum = getattr(row[0], "row", None) if row else None
            numbers.append(rownum if rownum is not None else len(numbers) + 1)
            rows.append(values)
    finally:
        wb.close()
    table = RawTable(name, title, rows, numbers)
    _find_formulas(p, name, title, table, max_rows)
    return table


def _find_formulas(p: Path, name: str, title: str, table: RawTable, max_rows: int) -> None:
    """Record formula cells (row, col) -> formula text, from a second, formula-keeping read.

    Cached values were read already; a formula whose cached value is missing is reported by
    the column validators as "formula with no saved value" when its column is used.
    """
    wb = _open_workbook(p, name, data_only=False)
    try:
        ws = wb[title]
        index = {r: i for i, r in enumerate(table.row_numbers)}
        for _, row in _iter_limited(ws, name, title, max_rows):
            for j, c in enumerate(row):
                if getattr(c, "data_type", None) == "f":
                    r = getattr(c, "row", None)
                    if r in index:
                        table.formula_cells[(index[r], j)] = str(c.value)[:60]
                    elif r is not None:
                        # a formula in a row whose cached values are all empty
                        index[r] = len(table.rows)
                        table.rows.append([None] * (j + 1))
                        table.row_numbers.append(r)
                        table.formula_cells[(index[r], j)] = str(c.value)[:60]
    finally:
        wb.close()


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


def _read_csv(p: Path, name: str, max_rows: int) -> RawTable:
    data = p.read_bytes()
    if b"\x00" in data[:4096] and not data.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise InputError("this is a binary file, not csv text", file=name)
    text, encoding = _decode(data, name)
    sample = text[:65536]
    try:
        dialect = csv.Sniffer().sniff(sample, delimiters=",;\t|")
        delimiter = dialect.delimiter
    except csv.Error:
        delimiter = ","
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter, quotechar='"')
    rows: list[list[object]] = []
    numbers: list[int] = []
    try:
        start = 1
        for rec in reader:
            if len(rows) > max_rows:
                raise InputError(f"the file has more than {max_rows:,} data rows; split the "
                                 "file or raise the limit with --max-rows", file=name)
            if any(c.strip() for c in rec):
                rows.append([c if c.strip() else None for c in rec])
                numbers.append(start)
            start = reader.line_num + 1
    except csv.Error as err:
        raise InputError(f"csv syntax error: {err}", file=name, row=reader.line_num) from None
    table = RawTable(name, None, rows, numbers, decimal_comma=delimiter in ";\t|")
    if encoding == "cp1252":
        table.notes.append("read as Windows-1252 text (not UTF-8)")
    return table
