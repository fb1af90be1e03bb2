"""Plain-text tables for the terminal."""

from __future__ import annotations

from collections.abc import Sequence


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
    if v is None:
        return "-"
    if isinstance(v, float):
        if v != v:
            return "-"
        if v == 0:
            return "0"
        if abs(v) >= 1000:
            return f"{v:,.0f}"
        if abs(v) < 0.001:
            return f"{v:.2e}"
        return f"{v:.4g}"
    return str(v)
