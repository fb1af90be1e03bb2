"""Plain-text tables for the terminal."""

from __future__ import annotations

from collections.abc import Sequence

from qualbayes.evidence.numbers import cell


def table(headers: Sequence[str], rows: Sequence[Sequence[object]],
          align: str | None = None) -> str:
    """Columns padded to width; ``align`` holds 'l' or 'r' per column (default: text left,
    numbers right)."""
    text = [[_fmt(v) for v in row] for row in rows]
    widths = [max([len(h)] + [len(r[j]) for r in text]) for j, h in enumerate(headers)]
    if align is None:
        align = "".join(
            "r" if rows and all(isinstance(r[j], int | float) or r[j] is None for r in rows)
            else "l" for j in range(len(headers)))

    def line(cells):
        return "  ".join(c.rjust(w) if a == "r" else c.ljust(w)
                         for c, w, a in zip(cells, widths, align, strict=True)).rstrip()

    out = [line(headers), line(["-" * w for w in widths])]
    out += [line(r) for r in text]
    return "\n".join(out)


def _fmt(v: object) -> str:
    return cell(v)
