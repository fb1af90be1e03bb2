"""PDF of a report, drawn with matplotlib (no extra dependency): A4 pages of text and
tables in a simple flowing layout, then one page per figure. Text is embedded as TrueType
so it can be searched and extracted."""

from __future__ import annotations

import io
import textwrap
from pathlib import Path

from qualbayes.evidence.document import Figure, Paragraph, Report, Table, fmt

PAGE_W, PAGE_H = 8.27, 11.69  # A4, inches
MARGIN = 0.6
TEXT_PT, HEAD_PT, TITLE_PT = 8.5, 11.0, 15.0


class _Pages:
    """Flowing text layout over A4 pages; ``y`` is the cursor in inches from the top."""

    def __init__(self, pdf, plt):
        self.pdf, self.plt = pdf, plt
        self.fig = None
        self.count = 0
        self.new_page()

    def new_page(self):
        if self.fig is not None:
            self.pdf.savefig(self.fig)
            self.plt.close(self.fig)
        self.fig = self.plt.figure(figsize=(PAGE_W, PAGE_H))
        self.count += 1
        self.y = MARGIN
        self.fig.text(1 - MARGIN / PAGE_W, MARGIN / 2 / PAGE_H, f"page {self.count}",
                      ha="right", va="bottom", fontsize=7, color="#555")

    def need(self, height: float):
        if self.y + height > PAGE_H - MARGIN:
            self.new_page()

    def line(self, text: str, size: float = TEXT_PT, weight: str = "normal",
             family: str = "DejaVu Sans", gap: float = 1.35, box: bool = False):
        h = size * gap / 72
        self.need(h)
        kw = {}
        if box:
            kw["bbox"] = {"facecolor": "#e8e8e8", "edgecolor": "#000", "pad": 3}
        self.fig.text(MARGIN / PAGE_W, 1 - (self.y + size / 72) / PAGE_H, text, fontsize=size,
                      weight=weight, family=family, ha="left", va="baseline", **kw)
        self.y += h

    def space(self, inches: float):
        self.y += inches

    def close(self):
        self.pdf.savefig(self.fig)
        self.plt.close(self.fig)


def _wrap(text: str, size: float, mono: bool = False) -> list[str]:
    char_w = (0.60 if mono else 0.52) * size / 72
    width = max(20, int((PAGE_W - 2 * MARGIN) / char_w))
    return textwrap.wrap(text, width=width, break_long_words=True) or [""]


def _table_lines(table: Table) -> tuple[list[str], float]:
    cells = [[fmt(v) for v in row] for row in table.rows]
    widths = [max([len(h)] + [len(r[j]) for r in cells]) for j, h in enumerate(table.headers)]
    widths = [min(w, 48) for w in widths]

    def cut(s, w):
        return s if len(s) <= w else s[: w - 1] + "~"

    def line(row):
        return "  ".join(cut(c, w).ljust(w) for c, w in zip(row, widths, strict=True)).rstrip()

    lines = [line(table.headers), "  ".join("-" * w for w in widths)]
    lines += [line(r) for r in cells]
    longest = max(len(s) for s in lines)
    size = min(7.5, (PAGE_W - 2 * MARGIN) / (0.60 * max(longest, 1)) * 72)
    return lines, max(size, 4.0)


def write_pdf(report: Report, path: Path, pngs: dict[str, bytes]) -> int:
    """Write the PDF; returns the number of pages."""
    import matplotlib  # noqa: PLC0415

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt  # noqa: PLC0415
    from matplotlib.backends.backend_pdf import PdfPages  # noqa: PLC0415

    with matplotlib.rc_context({"pdf.fonttype": 42}), PdfPages(
            path, metadata={"Title": report.title, "Creator": "qualbayes",
                            "CreationDate": None, "ModDate": None}) as pdf:
        pages = _Pages(pdf, plt)
        pages.line(report.title, TITLE_PT, "bold")
        for s in _wrap(report.subtitle, TEXT_PT):
            pages.line(s)
        if report.alert:
            pages.space(0.1)
            for s in _wrap(report.alert, 10.0):
                pages.line(s, 10.0, "bold", box=True)
        figures: list[Figure] = []
        for section in report.sections:
            pages.space(0.12)
            pages.need(0.6)
            pages.line(section.title, HEAD_PT, "bold")
            for block in section.blocks:
                if isinstance(block, Paragraph):
                    mono = block.style == "mono"
                    weight = "bold" if block.style in ("alert", "caution") else "normal"
                    for s in _wrap(block.text, TEXT_PT, mono):
                        pages.line(s, TEXT_PT, weight,
                                   "DejaVu Sans Mono" if mono else "DejaVu Sans")
                elif isinstance(block, Table):
                    lines, size = _table_lines(block)
                    for s in lines:
                        pages.line(s, size, family="DejaVu Sans Mono", gap=1.3)
                    if block.caption:
                        for s in _wrap(block.caption, 7.0):
                            pages.line(s, 7.0)
                    pages.space(0.06)
                elif isinstance(block, Figure):
                    figures.append(block)
                    pages.line(f"[figure: {block.title} - see page of figures]", 7.5)
        pages.close()
        for f in figures:
            _figure_page(pdf, plt, f, pngs[f.id])
            pages.count += 1
    return pages.count


def _figure_page(pdf, plt, f: Figure, png: bytes) -> None:
    import matplotlib.image as mpimg  # noqa: PLC0415

    img = mpimg.imread(io.BytesIO(png), format="png")
    page = plt.figure(figsize=(PAGE_W, PAGE_H))
    page.text(MARGIN / PAGE_W, 1 - MARGIN / PAGE_H, f.title, fontsize=HEAD_PT, weight="bold",
              va="top")
    h, w = img.shape[:2]
    avail_w, avail_h = PAGE_W - 2 * MARGIN, PAGE_H - 2 * MARGIN - 1.2
    scale = min(avail_w / w, avail_h / h)
    ax = page.add_axes([MARGIN / PAGE_W, 1 - (MARGIN + 0.5 + h * scale) / PAGE_H,
                        w * scale / PAGE_W, h * scale / PAGE_H])
    ax.imshow(img, interpolation="lanczos")
    ax.axis("off")
    if f.caption:
        for k, s in enumerate(_wrap(f.caption, 8.0)):
            page.text(MARGIN / PAGE_W, 1 - (MARGIN + 0.7 + h * scale + 0.16 * k) / PAGE_H, s,
                      fontsize=8.0, va="top")
    pdf.savefig(page)
    plt.close(page)
