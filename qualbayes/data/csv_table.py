"""Reading a csv/txt export from its bytes (see :mod:`qualbayes.data.readers`).

Encodings: UTF-8 (with or without a mark), UTF-16 with its mark, and Windows-1252 only when
the file holds no UTF-8 at all (mixed encodings are refused). The delimiter is the one that
splits the first records most consistently. Before the csv module splits anything, a line
of more than ``MAX_COLUMNS`` cells is refused; rows are kept trimmed, counted against the row
limit and the cell budget as they are read.
"""

from __future__ import annotations

import csv
import io
import re
from collections.abc import Iterator

from qualbayes.data.readers import (
    MAX_CELLS,
    MAX_COLUMNS,
    RawTable,
    too_many_cells,
    trimmed,
)
from qualbayes.errors import InputError

#: Delimiter detection looks at this many records of the start of a csv.
_SNIFF_RECORDS = 30


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


def read_csv_bytes(data: bytes, name: str, max_rows: int) -> RawTable:
    if b"\x00" in data[:4096] and not data.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise InputError("this is a binary file, not csv text", file=name)
    text, encoding = _decode(data, name)
    del data
    delimiter = _guess_delimiter(text)
    _check_widths(text, delimiter, name)
    if text.count("\n") > max_rows:
        # Possibly too long: count the records first, keeping none of them, so that a file
        # of millions of rows is refused without building a table of them.
        for k, (line, _) in enumerate(_records(text, delimiter, name)):
            if k > max_rows:
                raise _too_many_csv_rows(name, max_rows, line)
    rows: list[list[object]] = []
    numbers: list[int] = []
    kept = 0
    for line, rec in _records(text, delimiter, name):
        if len(rows) > max_rows:
            raise _too_many_csv_rows(name, max_rows, line)
        if len(rec) > MAX_COLUMNS:
            raise _too_wide(name, line, len(rec))
        values = trimmed([c if c.strip() else None for c in rec])
        kept += len(values)
        if kept > MAX_CELLS:
            raise too_many_cells(name, None, line)
        rows.append(values)
        numbers.append(line)
    table = RawTable(name, None, rows, numbers, decimal_comma=delimiter in ";\t|")
    if encoding == "cp1252":
        table.notes.append("read as Windows-1252 text (not UTF-8)")
    return table


def _too_wide(name: str, line: int, cells: int, more: bool = False) -> InputError:
    return InputError(f"line {line:,} has {'more than ' if more else ''}{cells:,} cells; at most "
                      f"{MAX_COLUMNS:,} columns are read. Delete the cells right of the table",
                      file=name, row=line)


def _check_widths(text: str, delimiter: str, name: str) -> None:
    """Refuse a line of more than MAX_COLUMNS delimiters before the csv module splits it
    (one 188 MB line of commas would become 188 million strings). Only lines long enough
    to hold that many are counted, and quoted text in them is left out of the count."""
    for m in re.finditer(rf"[^\n]{{{MAX_COLUMNS + 1},}}", text):
        if text.count(delimiter, m.start(), m.end()) < MAX_COLUMNS:
            continue
        segment = m.group()
        if '"' in segment:
            segment = re.sub(r'"[^"]*"', "", segment)
        if segment.count(delimiter) >= MAX_COLUMNS:
            line = text.count("\n", 0, m.start()) + 1
            raise _too_wide(name, line, MAX_COLUMNS, more=True)


def _too_many_csv_rows(name: str, max_rows: int, line: int) -> InputError:
    return InputError(f"the file has more than {max_rows:,} data rows (line {line:,} is "
                      "past the limit); split the file or raise the limit with --max-rows",
                      file=name)
