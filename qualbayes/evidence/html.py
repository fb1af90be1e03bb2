"""Self-contained HTML: styles inline, figures as embedded PNG, no request to the network.

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
margin-top:28px;padding-bottom:2px}.subtitle{color:#444;margin-bottom:12px}
table{border-collapse:collapse;margin:8px 0 4px;font-size:12px}
th,td{border:1px solid #777;padding:3px 6px;text-align:left;vertical-align:top}
th{background:#e4e4e4}tr:nth-child(even) td{background:#f6f6f6}
caption{caption-side:bottom;text-align:left;color:#444;font-size:11px;padding-top:3px}
.alert{border:3px solid #000;background:#fff;padding:10px 14px;font-size:15px;
font-weight:bold;margin:12px 0}
.caution{border-left:6px solid #333;background:#eee;padding:8px 12px;font-weight:bold}
.mono{font-family:"DejaVu Sans Mono",monospace;font-size:12px;word-break:break-all}
figure{margin:12px 0;page-break-inside:avoid}figure img{max-width:100%;border:1px solid #bbb}
figcaption{color:#444;font-size:11px}
@media print{body{margin:0;max-width:none}h2{page-break-after:avoid}
table{page-break-inside:auto}tr{page-break-inside:avoid}}
"""

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


def render_html(report: Report, pngs: dict[str, bytes] | None = None) -> str:
    pngs = pngs if pngs is not None else {f.id: png_bytes(f.figure) for f in report.figures()}
    parts = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
             # no network and no script at all: every fetch is forbidden except embedded
             # images, and no script may run (the page has none)
             f'<meta http-equiv="Content-Security-Policy" content="{CSP}">',
             f"<title>{escape(report.title)}</title><style>{CSS}</style></head><body>",
             f"<h1>{escape(report.title)}</h1>",
             f'<div class="subtitle">{escape(report.subtitle)}</div>']
    if report.alert:
        parts.append(f'<div class="alert" id="gate-alert">{escape(report.alert)}</div>')
    for section in report.sections:
        parts.append(f"<section><h2>{escape(section.title)}</h2>")
        for block in section.blocks:
            parts.append(_block(block, pngs))
        parts.append("</section>")
    parts.append("</body></html>")
    return "\n".join(parts)


def _block(block, pngs) -> str:
    if isinstance(block, Paragraph):
        cls = f' class="{block.style}"' if block.style else ""
        return f"<p{cls}>{escape(block.text)}</p>"
    if isinstance(block, Table):
        ident = f' id="{escape(block.id)}"' if block.id else ""
        head = "".join(f"<th>{escape(h)}</th>" for h in block.headers)
        body = "".join("<tr>" + "".join(f"<td>{escape(fmt(v))}</td>" for v in row) + "</tr>"
                       for row in block.rows)
        cap = f"<caption>{escape(block.caption)}</caption>" if block.caption else ""
        return f"<table{ident}>{cap}<thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"
    if isinstance(block, Figure):
        data = base64.b64encode(pngs[block.id]).decode("ascii")
        cap = escape(block.caption or block.title)
        return (f'<figure id="{escape(block.id)}"><img alt="{escape(block.title)}" '
                f'src="data:image/png;base64,{data}"><figcaption>{cap}</figcaption></figure>')
    raise TypeError(f"unknown block {type(block).__name__}")
