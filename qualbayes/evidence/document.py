"""A report as a plain document: sections of paragraphs, tables and figures.

Builders turn a run record into a :class:`Report`; renderers (html.py, pdf.py) turn a
Report into a file. Nothing here computes statistics.
"""

from __future__ import annotations

from dataclasses import dataclass, field


@dataclass
class Table:
    headers: list[str]
    rows: list[list[object]]
    caption: str = ""
    id: str = ""


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

    def figures(self) -> list[Figure]:
        return [b for s in self.sections for b in s.blocks if isinstance(b, Figure)]

    def tables(self) -> list[Table]:
        return [b for s in self.sections for b in s.blocks if isinstance(b, Table)]


def fmt(value: object) -> str:
    """One text form of a cell for every renderer (so HTML, PDF and tests agree)."""
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        if value != value:
            return "-"
        if value == 0:
            return "0"
        if abs(value) >= 1e5 or abs(value) < 1e-4:
            return f"{value:.4g}"
        return f"{value:.6g}"
    return str(value)
