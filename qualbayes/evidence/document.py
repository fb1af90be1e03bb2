"""A report as a plain document: sections of paragraphs, tables and figures.

Builders turn a run record into a :class:`Report`; renderers (html.py, pdf.py) turn a
Report into a file. Nothing here computes statistics.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from qualbayes.evidence.numbers import cell


@dataclass
class Table:
    headers: list[str]
    rows: list[list[object]]
    caption: str = ""
    id: str = ""
    #: "" , "kv" (item-value pairs: long values such as a SHA-256 wrap anywhere) or
    #: "signoff" (a form to fill in: tall empty cells)
    style: str = ""


@dataclass
class Figure:
    """A matplotlib figure (kept as the object so each renderer saves it its own way)."""

    title: str
    figure: object
    caption: str = ""
    id: str = ""


@dataclass
class Paragraph:
    text: str
    style: str = ""  # "", "alert", "caution", "mono"


@dataclass
class Section:
    title: str
    blocks: list[Paragraph | Table | Figure] = field(default_factory=list)


@dataclass
class Report:
    title: str
    subtitle: str
    sections: list[Section]
    alert: str | None = None  # shown at the very top (e.g. a failed convergence gate)
    #: run metadata shown under the title and in the page margins: created_utc, report_id,
    #: tool_version, analyst (see report_common.run_metadata)
    meta: dict = field(default_factory=dict)
    caution: str = ""  # repeated on every printed page

    def figures(self) -> list[Figure]:
        return [b for s in self.sections for b in s.blocks if isinstance(b, Figure)]

    def tables(self) -> list[Table]:
        return [b for s in self.sections for b in s.blocks if isinstance(b, Table)]


def fmt(value: object) -> str:
    """One text form of a cell for every renderer (so HTML, PDF and tests agree); builders
    format rates and probabilities themselves with :mod:`qualbayes.evidence.numbers`."""
    return cell(value)
