"""Builders of broken and odd spreadsheets for the hostile-input tests (all into tmp_path).

Worksheet XML is written by hand where openpyxl cannot make the case (cached formula values,
lying size records, far columns, entity declarations); a small openpyxl workbook serves as
the template for the other parts of the package.
"""

from __future__ import annotations

import contextlib
import signal
import struct
import zipfile
from pathlib import Path
from xml.sax.saxutils import escape

SHEET = "xl/worksheets/sheet1.xml"
NS = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"


def column_letter(j: int) -> str:
    """1 -> A, 27 -> AA (spreadsheet column names)."""
    out = ""
    while j:
        j, r = divmod(j - 1, 26)
        out = chr(65 + r) + out
    return out


def cell_xml(ref: str, value) -> str:
    """One <c> element. ``value``: str (inline string), int/float, None (no cell), or
    ("f", formula, cached) for a formula with its saved value (cached None: no value)."""
    if value is None:
        return ""
    if isinstance(value, tuple) and value[0] == "f":
        _, formula, cached = value
        if cached is None:
            return f'<c r="{ref}"><f>{escape(formula)}</f></c>'
        if isinstance(cached, str) and cached.startswith("#"):
            return f'<c r="{ref}" t="e"><f>{escape(formula)}</f><v>{escape(cached)}</v></c>'
        if isinstance(cached, str):
            return f'<c r="{ref}" t="str"><f>{escape(formula)}</f><v>{escape(cached)}</v></c>'
        return f'<c r="{ref}"><f>{escape(formula)}</f><v>{cached}</v></c>'
    if isinstance(value, str):
        return f'<c r="{ref}" t="inlineStr"><is><t>{escape(value)}</t></is></c>'
    return f'<c r="{ref}"><v>{value}</v></c>'


def sheet_xml(rows: list[list], dimension: str | None = "auto", first_row: int = 1,
              first_col: int = 1, extra: str = "") -> bytes:
    """Worksheet XML for ``rows`` placed from (first_row, first_col); a None row is a gap."""
    parts = []
    width = max((len(r) for r in rows if r is not None), default=1)
    for i, row in enumerate(rows):
        if row is None:
            continue
        r = first_row + i
        cells = "".join(cell_xml(f"{column_letter(first_col + j)}{r}", v)
                        for j, v in enumerate(row))
        parts.append(f'<row r="{r}">{cells}</row>')
    if dimension == "auto":
        last = f"{column_letter(first_col + width - 1)}{first_row + len(rows) - 1}"
        dimension = f"{column_letter(first_col)}{first_row}:{last}"
    dim = f'<dimension ref="{dimension}"/>' if dimension else ""
    return (f'<worksheet xmlns="{NS}">{dim}<sheetData>{"".join(parts)}</sheetData>{extra}'
            "</worksheet>").encode()


def template(path: Path) -> Path:
    """A minimal valid workbook (one sheet called 'Inspection') made by openpyxl."""
    from openpyxl import Workbook

    wb = Workbook()
    wb.active.title = "Inspection"
    wb.active.append(["Lot", "Inspected", "Defects"])
    wb.active.append(["A", 50, 0])
    wb.save(path)
    return path


def rezip(src: Path, dst: Path, replace: dict | None = None, add: dict | None = None) -> Path:
    """Copy the package ``src`` to ``dst``, replacing parts (bytes, or a function of the old
    bytes) and adding parts."""
    replace = replace or {}
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(dst, "w", zipfile.ZIP_DEFLATED) as zout:
        for item in zin.infolist():
            data = zin.read(item.filename)
            if item.filename in replace:
                new = replace[item.filename]
                data = new(data) if callable(new) else new
            zout.writestr(item, data)
        for name, data in (add or {}).items():
            zout.writestr(name, data)
    return dst


def xlsx_with_sheet(tmp: Path, name: str, sheet: bytes) -> Path:
    """A workbook whose only sheet has the given worksheet XML."""
    base = template(tmp / f"_template_{name}")
    return rezip(base, tmp / name, {SHEET: sheet})


def patch_central_size(path: Path, member: str, size: int) -> None:
    """Rewrite the uncompressed size that the zip's central directory records for
    ``member`` (a lying size record; the data is unchanged)."""
    data = bytearray(path.read_bytes())
    name = member.encode()
    pos = 0
    while True:
        pos = data.index(b"PK\x01\x02", pos)
        name_len = struct.unpack_from("<H", data, pos + 28)[0]
        if bytes(data[pos + 46: pos + 46 + name_len]) == name:
            struct.pack_into("<I", data, pos + 24, size)
            break
        pos += 4
    path.write_bytes(bytes(data))


def member_data_offset(path: Path, member: str) -> tuple[int, int]:
    """(offset, length) of the compressed bytes of ``member`` inside the zip file."""
    with zipfile.ZipFile(path) as zf:
        info = zf.getinfo(member)
    raw = path.read_bytes()
    name_len, extra_len = struct.unpack_from("<HH", raw, info.header_offset + 26)
    start = info.header_offset + 30 + name_len + extra_len
    return start, info.compress_size


BILLION_LAUGHS = (
    b'<?xml version="1.0"?><!DOCTYPE lolz [<!ENTITY lol "lol">'
    b'<!ENTITY lol1 "&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;">'
    b'<!ENTITY lol2 "&lol1;&lol1;&lol1;&lol1;&lol1;&lol1;&lol1;&lol1;&lol1;&lol1;">'
    b'<!ENTITY lol3 "&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;">'
    b'<!ENTITY lol4 "&lol3;&lol3;&lol3;&lol3;&lol3;&lol3;&lol3;&lol3;&lol3;&lol3;">'
    b'<!ENTITY lol5 "&lol4;&lol4;&lol4;&lol4;&lol4;&lol4;&lol4;&lol4;&lol4;&lol4;">'
    b'<!ENTITY lol6 "&lol5;&lol5;&lol5;&lol5;&lol5;&lol5;&lol5;&lol5;&lol5;&lol5;">'
    b'<!ENTITY lol7 "&lol6;&lol6;&lol6;&lol6;&lol6;&lol6;&lol6;&lol6;&lol6;&lol6;">'
    b'<!ENTITY lol8 "&lol7;&lol7;&lol7;&lol7;&lol7;&lol7;&lol7;&lol7;&lol7;&lol7;">'
    b'<!ENTITY lol9 "&lol8;&lol8;&lol8;&lol8;&lol8;&lol8;&lol8;&lol8;&lol8;&lol8;">]>'
)

EXTERNAL_ENTITY = (
    b'<?xml version="1.0"?><!DOCTYPE ws [<!ENTITY xxe SYSTEM "file:///etc/passwd">]>'
)


def strip_declaration(xml: bytes) -> bytes:
    return xml.split(b"?>", 1)[1] if xml.startswith(b"<?xml") else xml


class Hang(BaseException):
    """Raised by the deadline; a BaseException so no `except Exception` can swallow it."""


@contextlib.contextmanager
def deadline(seconds: int):
    """Fail instead of hanging. A guard against hangs, not a timing measurement."""

    def on_alarm(signum, frame):
        raise Hang(f"no answer within {seconds} s")

    old = signal.signal(signal.SIGALRM, on_alarm)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)
