"""The PDF of a report: the report's HTML typeset by WeasyPrint with its print rules (A4,
tables whose header row repeats on every page, the caution at the foot and the page number
at the head of every page, figures where the text refers to them).

WeasyPrint needs the system libraries Pango and HarfBuzz (README, "System packages"). The document
is self-contained: every image is embedded, and the fetcher refuses any other URL, so a
name from an untrusted spreadsheet can never make the renderer read a file or the network.
"""

from __future__ import annotations

from pathlib import Path

from qualbayes.evidence.document import Report
from qualbayes.evidence.html import render_html


def _embedded_only():
    """A URL fetcher that serves ``data:`` URLs only."""
    from weasyprint.urls import URLFetcher  # noqa: PLC0415

    return URLFetcher(allowed_protocols=("data",), allow_redirects=False)


def pdf_bytes(report: Report, pngs: dict[str, bytes]) -> tuple[bytes, int]:
    """The PDF and its number of pages."""
    import logging  # noqa: PLC0415

    import weasyprint  # noqa: PLC0415

    logging.getLogger("weasyprint").setLevel(logging.ERROR)
    logging.getLogger("fontTools").setLevel(logging.ERROR)
    document = weasyprint.HTML(string=render_html(report, pngs), base_url=None,
                               url_fetcher=_embedded_only()).render()
    meta = document.metadata
    meta.title = report.title
    meta.authors = [report.meta["analyst"]] if (report.meta or {}).get("analyst") else []
    meta.generator = "qualbayes"
    if (report.meta or {}).get("created_utc"):
        meta.created = meta.modified = report.meta["created_utc"]
    return document.write_pdf(), len(document.pages)


def write_pdf(report: Report, path: Path, pngs: dict[str, bytes]) -> int:
    """Write the PDF; returns the number of pages."""
    data, pages = pdf_bytes(report, pngs)
    Path(path).write_bytes(data)
    return pages
