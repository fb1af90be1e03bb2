"""Workbook rows about the inputs themselves: each file with its SHA-256, the rows left out
for want of a result, and the columns not used (shared by lots, life and suppliers). They
are added to the Provenance sheet; the notes already reach the Cautions sheet."""

from __future__ import annotations


def input_rows(record: dict) -> list[list[object]]:
    """Provenance rows: one per input file, one per row left out, the columns not used."""
    inp = record["input"]
    rows: list[list[object]] = []
    for k, s in enumerate(inp.get("sources") or [], start=1):
        read = s.get("lots", s.get("units"))
        rows.append([f"input {k}", s["file"], "sheet", s["sheet"], "SHA-256", s["sha256"],
                     "header row", s["header_row"], "rows read", read,
                     "rows left out", s.get("skipped")])
    for s in inp.get("rows_skipped") or []:
        rows.append(["row left out", s.get("source", inp["file"]), "row", s["row"], "id",
                     s.get("lot", s.get("unit")), "why", s["reason"]])
    if inp.get("columns_not_used"):
        rows.append(["columns not used", *inp["columns_not_used"]])
    return rows


def with_input_rows(sheets: dict, record: dict) -> dict:
    """``sheets`` with :func:`input_rows` appended to its Provenance sheet."""
    return {**sheets, "Provenance": [*sheets["Provenance"], *input_rows(record)]}
