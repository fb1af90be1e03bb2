"""Evidence workbooks (xlsx). Text from the input is never evaluated by a spreadsheet."""

from __future__ import annotations

import math
from collections.abc import Callable
from pathlib import Path

import pandas as pd

from qualbayes.evidence.files import write_atomic
from qualbayes.evidence.numbers import excel_format

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def safe_cell(value: object) -> object:
    """Numbers stay numbers; text that a spreadsheet would read as a formula gets a leading
    apostrophe (and is stored as a text cell), as OWASP advises for CSV/formula injection."""
    if isinstance(value, str):
        return "'" + value if value.startswith(_FORMULA_START) else value
    if isinstance(value, float) and not math.isfinite(value):
        return str(value)
    if value is pd.NA or value is pd.NaT:
        return None
    if hasattr(value, "item") and not isinstance(value, str):  # numpy scalars
        return value.item()
    return value


def write_workbook(path: Path, sheets: dict[str, pd.DataFrame | list[list[object]]],
                   force: bool = False) -> Path:
    """Write ``sheets`` (name -> DataFrame or rows) to ``path`` atomically."""
    return write_atomic(path, workbook_writer(sheets), force)


def workbook_writer(sheets: dict[str, pd.DataFrame | list[list[object]]]
                    ) -> Callable[[Path], None]:
    """The function that saves ``sheets`` as an xlsx file at the path it is given."""
    from openpyxl import Workbook  # noqa: PLC0415
    from openpyxl.styles import Font  # noqa: PLC0415

    def writer(tmp: Path) -> None:
        wb = Workbook()
        wb.remove(wb.active)
        for name, content in sheets.items():
            ws = wb.create_sheet(title=name[:31])
            rows = _rows(content)
            formats = column_formats(content)
            for r, row in enumerate(rows, start=1):
                for c, value in enumerate(row, start=1):
                    cell = ws.cell(row=r, column=c)
                    cell.value = safe_cell(value)
                    if isinstance(cell.value, str):
                        cell.data_type = "s"
                    elif isinstance(cell.value, int | float) and not isinstance(
                            cell.value, bool):
                        cell.number_format = ("0" if row[0] in IDENTIFIERS else
                                              formats.get(c - 1) or _default_format(cell.value))
            if isinstance(content, pd.DataFrame):
                for cell in ws[1]:
                    cell.font = Font(bold=True)
                ws.freeze_panes = "A2"
            for col in ws.columns:
                width = max((len(str(c.value)) for c in col if c.value is not None), default=8)
                ws.column_dimensions[col[0].column_letter].width = min(max(width + 2, 8), 80)
        wb.save(tmp)

    return writer


#: row labels whose numbers are identifiers, shown without thousands separators
IDENTIFIERS = ("seed", "header row")


def _default_format(value: float) -> str:
    return excel_format("count") if isinstance(value, int) else excel_format("quantity")


def column_formats(content) -> dict[int, str]:
    """Display formats by column index: a DataFrame may name the kind of number in each
    column in ``frame.attrs["formats"]`` ({column: "rate" | "probability" | "count" |
    "quantity"}, and "rate_unit"); columns named ``P(...)`` are probabilities."""
    if not isinstance(content, pd.DataFrame):
        return {}
    kinds = dict(content.attrs.get("formats") or {})
    unit = content.attrs.get("rate_unit", "%")
    out = {}
    for j, col in enumerate(content.columns):
        kind = kinds.get(col) or ("probability" if str(col).startswith("P(") else None)
        if kind:
            out[j] = excel_format(kind, unit)
    return out


def _rows(content) -> list[list[object]]:
    if isinstance(content, pd.DataFrame):
        frame = content.astype(object).where(content.notna(), None)
        return [list(frame.columns), *frame.values.tolist()]
    return [list(r) for r in content]
