"""Self-contained HTML: styles inline, figures as embedded PNG, no request to the network and
no script. The same document, with its print rules (``@page``), is what pdf.py typesets.

Every piece of text is escaped: lot ids and file names come from untrusted spreadsheets.
"""

from __future__ import annotations

import base64
import io
from html import escape

from qualbayes.evidence.document import Figure, Paragraph, Report, Table, fmt

CSS = """
body{font-family:"DejaVu Sans",Helvetica,Arial,sans-serif;font-size:13px;color:#111;
max-width:1100px;margin:24px auto;padding:0 16px;line-height:1.4}
h1{font-size:22px;margin:0 0 4px}h2{font-size:16px;border-bottom:2px solid #333;
margin-top:28px;padding-bottom:2px}.subtitle{color:#444;margin-bottom:4px}
.meta{color:#444;font-size:12px;margin-bottom:12px}
table{border-collapse:collapse;margin:8px 0 4px;font-size:12px;max-width:100%}
th,td{border:1px solid #777;padding:3px 6px;text-align:left;vertical-align:top;
overflow-wrap:break-word}table.kv td{overflow-wrap:anywhere}
th{background:#e4e4e4}tr:nth-child(even) td{background:#f6f6f6}
td.num{text-align:right;white-space:nowrap}
caption{caption-side:bottom;text-align:left;color:#444;font-size:11px;padding-top:3px}
.alert{border:3px solid #000;background:#fff;padding:10px 14px;font-size:15px;
font-weight:bold;margin:12px 0}
.caution{border-left:6px solid #333;background:#eee;padding:8px 12px;font-weight:bold}
.mono{font-family:"DejaVu Sans Mono",monospace;font-size:12px;overflow-wrap:anywhere;
white-space:pre-wrap}
figure{margin:12px 0;break-inside:avoid}figure img{max-width:100%;height:auto;
border:1px solid #bbb}
figcaption{color:#444;font-size:11px}
.table-wrap{max-width:100%;overflow-x:auto}table.signoff{width:100%}table.signoff th{width:22%}
table.signoff td{height:34px;background:#fff}
@media print{body{margin:0;max-width:none;padding:0;font-size:9pt}
h1{font-size:15pt}h2{font-size:11.5pt;margin-top:14pt;break-after:avoid}
table{font-size:7.5pt;break-inside:auto}thead{display:table-header-group}
tr{break-inside:avoid}th,td{padding:2px 4px}.table-wrap{overflow:visible}.mono{font-size:8pt}
caption{font-size:7.5pt}figcaption{font-size:7.5pt}.alert{font-size:11pt}
figure img{max-height:200mm}section{break-before:auto}
h2+table,h2+p{break-before:avoid}#sec-sign-off{break-inside:avoid}}
"""


def _css_string(text: str) -> str:
    """``text`` as a CSS string literal (for the page-margin boxes); ``<`` and ``>`` are
    escaped too, so a value from a run record can never close the style element."""
    out = (text.replace("\\", "\\\\").replace('"', '\\"').replace("\n", " ")
           .replace("<", "\\3c ").replace(">", "\\3e "))
    return '"' + "".join(ch if ch.isprintable() else " " for ch in out) + '"'


def page_css(report: Report) -> str:
    """Rules for printed pages: A4, the caution at the foot of every page, the report id and
    page number at the head. Screens ignore them."""
    meta = report.meta or {}
    head = f"{report.title} - report {meta.get('report_id', '')}".strip(" -")
    return ("@page{size:A4;margin:20mm 14mm 24mm 14mm;"
            f"@top-left{{content:{_css_string(head)};font-size:7pt;color:#444}}"
            '@top-right{content:"page " counter(page) " of " counter(pages);font-size:7pt;'
            "color:#444}"
            f"@bottom-center{{content:{_css_string(report.caution)};font-size:7pt;"
            "font-weight:bold;color:#111;width:100%;text-align:left}}}")


#: The page's content-security policy: nothing fetched but embedded images, no script.
CSP = ("default-src 'none'; img-src data:; style-src 'unsafe-inline'; script-src 'none'; "
       "object-src 'none'; base-uri 'none'; form-action 'none'")


def png_bytes(fig) -> bytes:
    """PNG of a matplotlib figure (a figure given as PNG bytes already is passed through)."""
    if isinstance(fig, bytes):
        return fig
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110, metadata={"Software": None})
    return buf.getvalue()


def meta_line(meta: dict) -> str:
    """The run metadata in one line of words."""
    parts = [f"report {meta['report_id']}" if meta.get("report_id") else "",
             f"created {meta['created_utc']}" if meta.get("created_utc") else "",
             f"qualbayes {meta['tool_version']}" if meta.get("tool_version") else "",
             f"prepared by {meta['analyst']}" if meta.get("analyst") else ""]
    return "; ".join(p for p in parts if p)


def render_html(report: Report, pngs: dict[str, bytes] | None = None) -> str:
    pngs = pngs if pngs is not None else {f.id: png_bytes(f.figure) for f in report.figures()}
    parts = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
             '<meta name="viewport" content="width=device-width, initial-scale=1">',
             # no network and no script at all: every fetch is forbidden except embedded
             # images, and no script may run (the page has none)
             f'<meta http-equiv="Content-Security-Policy" content="{CSP}">',
             f"<title>{escape(report.title)}</title>"
             f"<style>{CSS}{page_css(report)}</style></head><body>",
             f"<h1>{escape(report.title)}</h1>",
             f'<div class="subtitle">{escape(report.subtitle)}</div>']
    if report.meta:
        parts.append(f'<div class="meta" id="run-meta">{escape(meta_line(report.meta))}</div>')
    if report.alert:
        parts.append(f'<div class="alert" id="gate-alert">{escape(report.alert)}</div>')
    for section in report.sections:
        slug = "".join(ch if ch.isalnum() else "-" for ch in section.title.lower())
        parts.append(f'<section id="sec-{escape(slug)}"><h2>{escape(section.title)}</h2>')
        for block in section.blocks:
            parts.append(_block(block, pngs))
        parts.append("</section>")
    parts.append("</body></html>")
    return "\n".join(parts)


def _td(value, align_numbers: bool = True) -> str:
    number = isinstance(value, int | float) and not isinstance(value, bool)
    cls = ' class="num"' if number and align_numbers else ""
    return f"<td{cls}>{escape(fmt(value))}</td>"


def _block(block, pngs) -> str:
    if isinstance(block, Paragraph):
        cls = f' class="{block.style}"' if block.style else ""
        return f"<p{cls}>{escape(block.text)}</p>"
    if isinstance(block, Table):
        ident = f' id="{escape(block.id)}"' if block.id else ""
        cls = f' class="{escape(block.style)}"' if block.style else ""
        if block.style == "signoff":  # row headers and empty cells to fill in by hand
            body = "".join(f"<tr><th>{escape(fmt(r[0]))}</th>"
                           + "".join(f"<td>{escape(str(v or ''))}</td>" for v in r[1:])
                           + "</tr>" for r in block.rows)
            head = "".join(f"<th>{escape(h)}</th>" for h in block.headers)
        else:
            head = "".join(f"<th>{escape(h)}</th>" for h in block.headers)
            body = "".join("<tr>" + "".join(_td(v, block.style != "kv") for v in row)
                           + "</tr>" for row in block.rows)
        cap = f"<caption>{escape(block.caption)}</caption>" if block.caption else ""
        # a table wider than a narrow window scrolls in its own box, not the page
        return (f'<div class="table-wrap"><table{ident}{cls}>{cap}<thead><tr>{head}</tr>'
                f"</thead><tbody>{body}</tbody></table></div>")
    if isinstance(block, Figure):
        data = base64.b64encode(pngs[block.id]).decode("ascii")
        cap = f"<b>{escape(block.title)}.</b>" + (f" {escape(block.caption)}"
                                                   if block.caption != block.title else "")
        return (f'<figure id="{escape(block.id)}"><img alt="{escape(block.title)}" '
                f'src="data:image/png;base64,{data}"><figcaption>{cap}</figcaption></figure>')
    raise TypeError(f"unknown block {type(block).__name__}")
