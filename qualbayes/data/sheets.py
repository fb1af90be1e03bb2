"""Choosing the sheet of a workbook when the engineer names none.

Exports often open with a cover sheet, a legend or a pivot summary. When a workbook has more
than one visible sheet and no ``--sheet`` was given, the sheet read is the one whose top rows
hold a header naming every required column (by the same spellings and ``--columns`` mapping
the validators use). If no sheet or more than one sheet qualifies, the error lists the sheets
and asks for ``--sheet``; nothing is guessed.

>>> from qualbayes.data.lot_table import LOT_COLUMNS
>>> picker = SheetPicker(LOT_COLUMNS)
>>> picker.note is None
True
"""

from __future__ import annotations

from qualbayes.data.columns import HEADER_SEARCH_ROWS, Column, locate
from qualbayes.data.readers import MAX_COLUMNS, RawTable, read_table
from qualbayes.errors import InputError


class SheetPicker:
    """``pick_sheet`` hook for :func:`qualbayes.data.readers.read_table`.

    Called with the open workbook and the file name; returns the worksheet to read. After a
    pick among several sheets, :attr:`note` says which sheet was read and why.
    """

    def __init__(self, schema: tuple[Column, ...], mapping: dict[str, str] | None = None):
        self.schema = schema
        self.mapping = dict(mapping or {})
        self.note: str | None = None

    def __call__(self, wb, name: str):
        visible = [ws for ws in wb.worksheets
                   if getattr(ws, "sheet_state", "visible") == "visible"]
        if not visible:
            raise InputError("the workbook has no visible worksheet; name one with --sheet",
                             file=name)
        if len(visible) == 1:
            return visible[0]
        holding = [ws for ws in visible if self._holds_columns(ws, name)]
        listed = ", ".join(repr(ws.title) for ws in visible)
        needed = ", ".join(c.key for c in self.schema if c.required)
        if len(holding) == 1:
            self.note = (f"sheet {holding[0].title!r} read: of the sheets {listed}, the only "
                         f"one with the columns needed ({needed})")
            return holding[0]
        if not holding:
            raise InputError(f"no sheet has the columns needed ({needed}); the sheets are "
                             f"{listed}. Name the sheet with --sheet (and its columns with "
                             "--columns key=Header if their headers differ)", file=name)
        both = ", ".join(repr(ws.title) for ws in holding)
        raise InputError(f"several sheets have the columns needed ({needed}): {both}; name "
                         f"the one to read with --sheet (the sheets are {listed})", file=name)

    def _holds_columns(self, ws, name: str) -> bool:
        """Whether the top rows of ``ws`` hold a header naming every required column."""
        rows: list[list[object]] = []
        numbers: list[int] = []
        ws.reset_dimensions()
        for k, row in enumerate(ws.iter_rows(max_row=HEADER_SEARCH_ROWS, max_col=MAX_COLUMNS,
                                             values_only=True), start=1):
            values = list(row)
            if any(v is not None and v != "" for v in values):
                rows.append(values)
                numbers.append(k)
        if not rows:
            return False
        try:
            locate(RawTable(name, ws.title, rows, numbers), self.schema, self.mapping)
        except InputError:
            return False
        return True


def read_sheet(path, schema: tuple[Column, ...], mapping: dict[str, str], sheet: str | None,
               max_rows: int) -> RawTable:
    """:func:`read_table` with the sheet picked by its columns when none is named; the pick
    is stated in the table's notes."""
    picker = SheetPicker(schema, mapping)
    table = read_table(path, sheet=sheet, max_rows=max_rows, pick_sheet=picker)
    if picker.note:
        table.notes.append(picker.note)
    return table
