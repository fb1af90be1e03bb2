"""Audit reports: HTML in a real headless browser, PDF, rebuild from the run record."""

import http.server
import json
import os
import re
import shutil
import subprocess
import threading
from html import escape
from html.parser import HTMLParser
from pathlib import Path

import pytest
from helpers import write_csv

from qualbayes.cli import main
from qualbayes.evidence.report_folder import write_report_folder

ANALYST = "R. Quinlan <QA>"
CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
PDFTOTEXT = shutil.which("pdftotext")
needs_browser = pytest.mark.skipif(CHROMIUM is None and not os.environ.get("QUALBAYES_CI"),
                                   reason="chromium not installed (CI installs it)")


class _Tables(HTMLParser):
    """Text of every table cell, table by table, and the ids and data attributes seen."""

    def __init__(self):
        super().__init__()
        self.tables, self.ids, self.attrs, self._cell = [], set(), {}, None
        self.images = 0

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if "id" in a:
            self.ids.add(a["id"])
        if tag == "body":
            self.attrs.update(a)
        if tag == "table":
            self.tables.append([])
        if tag == "tr":
            self.tables[-1].append([])
        if tag in ("td", "th"):
            self._cell = ""
        if tag == "img" and a.get("src", "").startswith("data:image/png;base64,"):
            self.images += 1

    def handle_data(self, data):
        if self._cell is not None:
            self._cell += data

    def handle_endtag(self, tag):
        if tag in ("td", "th"):
            self.tables[-1][-1].append(self._cell)
            self._cell = None


def parse(html: str) -> _Tables:
    p = _Tables()
    p.feed(html)
    return p


@pytest.fixture(scope="module")
def history_report(tmp_path_factory, examples=None):
    from conftest import EXAMPLES

    out = tmp_path_factory.mktemp("rep") / "run1"
    assert main(["lots", str(EXAMPLES / "incoming_inspection.xlsx"), "--spec", "1%",
                 "--prior", "history", "--seed", "5", "--report", str(out),
                 "--analyst", ANALYST]) == 0
    return out


class _Recorder(http.server.BaseHTTPRequestHandler):
    seen: list = []

    def do_GET(self):  # noqa: N802 - http.server API
        _Recorder.seen.append(self.path)
        self.send_response(404)
        self.end_headers()

    do_CONNECT = do_POST = do_GET  # noqa: N815

    def log_message(self, *args):
        pass


def _browse(html: Path, tmp_path: Path, width: int = 1200) -> tuple[str, Path, list[str]]:
    """Open ``html`` in headless Chromium behind a recording loopback proxy; returns the DOM
    after load, a screenshot and the requests that did not come from the browser itself."""
    assert CHROMIUM, "chromium must be installed in CI (.ci/run installs it)"
    server = http.server.ThreadingHTTPServer(("127.0.0.1", 0), _Recorder)
    threading.Thread(target=server.serve_forever, daemon=True).start()
    _Recorder.seen.clear()
    flags = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
             "--disable-background-networking", "--disable-component-update",
             "--disable-sync", "--disable-quic", f"--user-data-dir={tmp_path / 'profile'}",
             f"--proxy-server=http://127.0.0.1:{server.server_address[1]}",
             "--proxy-bypass-list=<-loopback>", "--virtual-time-budget=5000",
             "--no-pings", "--disable-domain-reliability", "--disable-default-apps",
             "--disable-client-side-phishing-detection", "--hide-scrollbars",
             "--disable-features=NetworkTimeServiceQuerying,OptimizationHints,MediaRouter",
             f"--window-size={width},1800"]
    try:
        dom = subprocess.run([*flags, "--dump-dom", html.as_uri()], capture_output=True,
                             text=True, timeout=120).stdout
        shot = tmp_path / f"report-{width}.png"
        subprocess.run([*flags, f"--screenshot={shot}", html.as_uri()], capture_output=True,
                       timeout=120)
    finally:
        server.shutdown()
    # The browser's own background services (update and time checks) talk to its vendor's
    # hosts whatever page is open; any other request would come from the page.
    own = re.compile(r"^(https?://)?[\w.-]*\.(google\.com|googleapis\.com|gstatic\.com)"
                     r"(:\d+)?(/|$)")
    return dom, shot, [u for u in _Recorder.seen if not own.match(u)]


# The report carries no script (its content-security policy forbids any); the test opens
# a copy with this probe added, which writes what it measured into the body's attributes.
PROBE = """<script>
window.addEventListener('load',function(){var ok=0,imgs=document.images;
for(var i=0;i<imgs.length;i++){if(imgs[i].complete&&imgs[i].naturalWidth>0){ok++;}}
var b=document.body,d=document.documentElement;
b.setAttribute('data-images-loaded',ok+'/'+imgs.length);
b.setAttribute('data-overflow',String(d.scrollWidth-d.clientWidth));});
</script>"""


def _probed_copy(html: Path, tmp_path: Path) -> Path:
    text = html.read_text(encoding="utf-8")
    assert "<script" not in text.lower()
    from qualbayes.evidence.html import CSP

    assert CSP in text and "script-src 'none'" in CSP  # so no script runs
    text = text.replace(CSP, CSP.replace("script-src 'none'", "script-src 'unsafe-inline'"))
    copy = tmp_path / "probed.html"
    copy.write_text(text.replace("</body>", PROBE + "</body>"), encoding="utf-8")
    return copy


def _white_right_margin(shot: Path, width: int) -> bool:
    """True when the screenshot is ``width`` pixels wide and its right-most 8 columns are
    page background: nothing runs off the right edge."""
    import matplotlib.image as mpimg

    img = mpimg.imread(shot)
    return img.shape[1] == width and bool((img[:, -8:, :3] > 0.97).all())


def test_report_has_no_script_and_its_policy_forbids_any(history_report):
    html = (history_report / "report.html").read_text()
    assert "<script" not in html.lower()
    policy = re.search(r'Content-Security-Policy" content="([^"]*)"', html)[1]
    assert re.search(r"(^|; )script-src 'none'(;|$)", policy)
    assert "default-src 'none'" in policy


@needs_browser
def test_html_loads_in_headless_browser_with_no_network_request(history_report, tmp_path):
    html = history_report / "report.html"
    assert not re.search(r"""(src|href)\s*=\s*["']?(https?:|//)""", html.read_text())
    dom, shot, from_page = _browse(html, tmp_path)
    assert from_page == []
    page = parse(dom)
    assert "decision-summary" in page.ids
    n_fig = len(list((history_report / "figures").glob("*.png")))
    assert n_fig >= 4  # densities, intervals, prior/posterior, rank plots per part
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and shot.stat().st_size > 10_000
    assert _white_right_margin(shot, 1200)  # nothing runs off the right edge
    probed, _, _ = _browse(_probed_copy(html, tmp_path), tmp_path)
    attrs = parse(probed).attrs
    assert attrs.get("data-images-loaded") == f"{n_fig}/{n_fig}"
    assert attrs.get("data-overflow") == "0"  # no horizontal scrolling at 1200 px


@needs_browser
def test_html_screenshot_has_no_horizontal_overflow(history_report, tmp_path, width=800):
    # 1200 px is checked by the probe of the test above; here a narrow window
    html = history_report / "report.html"
    _, shot, _ = _browse(html, tmp_path, width)
    assert _white_right_margin(shot, width)
    probed, _, _ = _browse(_probed_copy(html, tmp_path), tmp_path, width)
    assert parse(probed).attrs.get("data-overflow") == "0"


@needs_browser
def test_the_overflow_check_catches_a_page_that_overflows(tmp_path):
    # control: a page wider than the window must fail both checks
    from qualbayes.evidence.html import CSP

    page = tmp_path / "wide.html"
    page.write_text("<!DOCTYPE html><html><head><meta http-equiv='Content-Security-Policy' "
                    f"content=\"{CSP}\"></head><body>"
                    "<table><tr><td style='background:#000'>" + "W" * 400
                    + "</td></tr></table></body></html>")
    _, shot, _ = _browse(page, tmp_path, 800)
    assert not _white_right_margin(shot, 800)
    probed, _, _ = _browse(_probed_copy(page, tmp_path), tmp_path, 800)
    assert int(parse(probed).attrs.get("data-overflow")) > 0


def test_html_content_order_and_caution(history_report):
    html = (history_report / "report.html").read_text()
    order = ["Decision summary", "The question asked", "Inputs", "Model and prior",
             "Sampler and diagnostics", "Results", "Figures", "Caution", "Package versions",
             "Reproduce this run"]
    positions = [html.index(f"<h2>{h}</h2>") for h in order]
    assert positions == sorted(positions)
    assert "CAUTION: decision support only" in html
    assert "ISO 2859-1" in html
    record = json.loads((history_report / "run.json").read_text())
    assert record["input"]["sha256"] in html


needs_pdftotext = pytest.mark.skipif(
    PDFTOTEXT is None and not os.environ.get("QUALBAYES_CI"),
    reason="pdftotext (poppler-utils) not installed (CI installs it)")


def _pdf_text(path: Path) -> list[str]:
    """The text of each page (pdftotext, layout kept)."""
    text = subprocess.run([PDFTOTEXT or "pdftotext", "-layout", str(path), "-"],
                          capture_output=True, text=True, check=True).stdout
    return [p for p in text.split("\f") if p.strip()]


def _words(text: str) -> str:
    return " ".join(text.split())


@needs_pdftotext
def test_pdf_is_typeset_with_every_lot_full_fingerprint_and_caution_on_each_page(
        history_report):
    pdf = history_report / "report.pdf"
    record = json.loads((history_report / "run.json").read_text())
    pages = _pdf_text(pdf)
    assert len(pages) >= 3
    for k, page in enumerate(pages, start=1):
        words = _words(page)
        assert "CAUTION: decision support only" in words, f"page {k} has no caution"
        assert f"page {k} of {len(pages)}" in words
        assert record["report_id"] in words
    text = "\n".join(pages)
    # the full fingerprint (a wrapped cell may split it over lines): nothing cut off
    assert record["input"]["sha256"] in "".join(text.split())
    assert not re.search(r"\S~(\s|$)", text)  # no cell cut off with "~"
    for lot in record["lots"]:
        rows = [row for row in text.splitlines() if row.strip().startswith(lot["lot"] + " ")]
        assert rows and all(lot["decision"] in row for row in rows), lot["lot"]
    # the results table runs over a page break: its header row is repeated
    with_rows = [p for p in pages if re.search(r"^\s*[ABG]-\d{4}\s+\S+\s+2026-", p, re.M)]
    assert len(with_rows) >= 2
    assert all(re.search(r"lot\s+part\s+date\s+n\s+x", p) for p in with_rows)
    # figures sit in the text, each under the heading that introduces them
    assert "Figures" in text and "Posterior density of each lot's defect rate" in text
    # sign-off block with the analyst's name and lines left to sign
    signoff = _words(text[text.index("Sign-off"):])
    assert "prepared by" in signoff and ANALYST in signoff
    assert "reviewed and approved by" in signoff


@needs_pdftotext
def test_pdf_of_a_life_report_holds_its_full_fingerprint(tmp_path, capsys):
    from conftest import EXAMPLES

    out = tmp_path / "life"
    assert main(["life", str(EXAMPLES / "sv30_zero_failure.csv"), "--mission", "3000",
                 "--target", "0.9", "--shape-prior", "1.5,4", "--units", "h",
                 "--report", str(out)]) == 0
    capsys.readouterr()
    record = json.loads((out / "run.json").read_text())
    text = "\n".join(_pdf_text(out / "report.pdf"))
    assert record["input"]["sha256"] in "".join(text.split())
    assert not re.search(r"\S~(\s|$)", text)


def test_report_numbers_are_for_people(history_report):
    html = (history_report / "report.html").read_text()
    page = parse(html)
    cells = [c for table in page.tables for row in table for c in row]
    sci = [c for c in cells if re.search(r"\d[eE][+-]?\d", c)]
    assert sci == []  # no scientific notation in any table
    assert "`" not in html  # no markdown shown literally
    summary = page.tables[0]
    col = summary[0].index("P(within spec)")
    probs = [row[col] for row in summary[1:]]
    assert all(re.fullmatch(r"(<0\.0001|>0\.9999|0|1|0\.\d{4})", p) for p in probs), probs
    results = next(t for t in page.tables if t[0][:3] == ["lot", "part", "date"])
    means = [row[5] for row in results[1:]]
    assert all(re.fullmatch(r"<?[\d.,]+%", m) for m in means), means  # rates in percent
    record = json.loads((history_report / "run.json").read_text())
    for key in ("created_utc", "report_id", "tool_version"):
        assert record[key] and str(record[key]) in html, key
    assert record["analyst"] == ANALYST and escape(ANALYST) in html
    assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ", record["created_utc"])


def test_rebuild_from_run_record_gives_identical_tables(history_report, tmp_path, capsys):
    rebuilt = tmp_path / "rebuilt"
    assert main(["report", str(history_report / "run.json"), "--out", str(rebuilt)]) == 0
    assert "CAUTION" in capsys.readouterr().out
    a = parse((history_report / "report.html").read_text())
    b = parse((rebuilt / "report.html").read_text())
    assert a.tables == b.tables and len(a.tables) >= 5
    assert (history_report / "run.json").read_text() == (rebuilt / "run.json").read_text()


def test_same_seed_same_numbers_changed_input_changes_fingerprint(tmp_path, capsys):
    rows = [["A", 125, 0], ["B", 80, 1], ["C", 200, 0]]
    src = write_csv(tmp_path / "in.csv", ["Lot", "Inspected", "Defects"], rows)
    for k in (1, 2):
        assert main(["lots", str(src), "--spec", "2%", "--report", str(tmp_path / f"r{k}")]) == 0
    r1 = json.loads((tmp_path / "r1" / "run.json").read_text())
    r2 = json.loads((tmp_path / "r2" / "run.json").read_text())
    assert r1["lots"] == r2["lots"]
    write_csv(src, ["Lot", "Inspected", "Defects"], [*rows[:2], ["C", 200, 1]])
    assert main(["lots", str(src), "--spec", "2%", "--report", str(tmp_path / "r3")]) == 0
    r3 = (tmp_path / "r3" / "report.html").read_text()
    assert r1["input"]["sha256"] not in r3
    assert json.loads((tmp_path / "r3" / "run.json").read_text())["input"]["sha256"] in r3
    capsys.readouterr()


def test_existing_report_folder_is_not_overwritten_without_force(tmp_path, capsys):
    src = write_csv(tmp_path / "in.csv", ["Lot", "Inspected", "Defects"], [["A", 125, 0]])
    out = tmp_path / "rep"
    assert main(["lots", str(src), "--spec", "2%", "--report", str(out)]) == 0
    before = {p.name: p.read_bytes() for p in out.iterdir() if p.is_file()}
    write_csv(src, ["Lot", "Inspected", "Defects"], [["A", 125, 4]])
    assert main(["lots", str(src), "--spec", "2%", "--report", str(out)]) == 3
    assert "refusing to overwrite" in capsys.readouterr().err
    assert {p.name: p.read_bytes() for p in out.iterdir() if p.is_file()} == before
    assert main(["lots", str(src), "--spec", "2%", "--report", str(out), "--force"]) == 0
    assert (out / "run.json").read_bytes() != before["run.json"]
    assert not [p for p in tmp_path.iterdir() if ".partial-" in p.name or ".old-" in p.name]


def test_failed_gate_report_says_so_at_the_top_and_shows_no_decision(tmp_path):
    import pandas as pd

    from qualbayes.data.lot_table import LotTable
    from qualbayes.evidence.lot_record import lots_record
    from qualbayes.inference.run import SamplerSettings
    from qualbayes.lot_question import assess_lots

    frame = pd.DataFrame({"lot": ["A", "B", "C"], "part": ["P"] * 3, "supplier": None,
                          "date": None, "lot_size": pd.array([None] * 3, dtype="Int64"),
                          "inspected": [50, 80, 125], "defectives": [0, 1, 2],
                          "row": [2, 3, 4]})
    table = LotTable(frame, "mem.csv", None, 1, {}, [])
    res = assess_lots(table, 0.02, 0.9, "history",
                      settings=SamplerSettings(num_warmup=30, num_samples=20, seed=1))
    record = lots_record(res, table, "0" * 64, "qualbayes lots mem.csv", {"x": "1"})
    write_report_folder(tmp_path / "r", record)
    html = (tmp_path / "r" / "report.html").read_text()
    page = parse(html)
    assert "gate-alert" in page.ids
    assert html.index("CONVERGENCE GATE FAILED") < html.index("<h2>Decision summary</h2>")
    summary = page.tables[0]
    col = summary[0].index("decision")  # the lots table gained basis and MCSE columns
    decisions = [row[col] for row in summary[1:]]
    assert decisions == ["not-converged"] * 3
    assert "accept" not in " ".join(decisions) and "reject" not in " ".join(decisions)


def test_plan_report_rebuilds_identically_and_carries_assumptions(tmp_path, capsys):
    out = tmp_path / "plan"
    assert main(["plan", "sampling", "--aql", "1%", "--alpha", "0.05", "--ltpd", "5%",
                 "--beta", "0.1", "--report", str(out)]) == 0
    html = (out / "report.html").read_text()
    page = parse(html)
    assert "decision-summary" in page.ids
    assert page.images == len(list((out / "figures").glob("*.png"))) >= 1
    assert "CAUTION: decision support only" in html and "ISO 2859-1" in html
    assert "drawn at random from the lot" in html  # a stated assumption
    inputs = next(t for t in page.tables if t[0] == ["input", "value"])
    labels = [row[0] for row in inputs[1:]]
    assert "lot size N" in labels or "acceptable quality level (AQL)" in labels
    assert not [w for w in labels if "_" in w or w in ("aql", "ltpd")]  # words, not keys
    assert "Test plan evidence: single sampling plan" in html
    rebuilt = tmp_path / "again"
    assert main(["report", str(out / "run.json"), "--out", str(rebuilt)]) == 0
    assert parse((rebuilt / "report.html").read_text()).tables == page.tables
    capsys.readouterr()


def test_life_report_has_summary_figures_and_rebuilds(tmp_path, capsys, examples=None):
    from conftest import EXAMPLES

    out = tmp_path / "life"
    assert main(["life", str(EXAMPLES / "sv30_rig_test.csv"), "--mission", "5000", "--target",
                 "0.9", "--confidence", "0.9", "--units", "h", "--report", str(out)]) == 0
    html = (out / "report.html").read_text()
    page = parse(html)
    assert "decision-summary" in page.ids
    record = json.loads((out / "run.json").read_text())
    groups = [g for g in record["groups"] if g["plot"] is not None]
    # probability plot, R(t) and rank plots per group
    assert page.images == 3 * len(groups) >= 3
    summary = page.tables[0]
    assert [row[0] for row in summary[1:]] == [g["group"] for g in record["groups"]]
    assert [row[-1] for row in summary[1:]] == [g["decision"] for g in record["groups"]]
    assert "CAUTION: decision support only" in html and "IEC 61649" in html
    rebuilt = tmp_path / "again"
    assert main(["report", str(out / "run.json"), "--out", str(rebuilt)]) == 0
    assert parse((rebuilt / "report.html").read_text()).tables == page.tables
    capsys.readouterr()


def test_rebuild_never_replaces_the_folder_holding_its_own_record(tmp_path, capsys):
    src = write_csv(tmp_path / "in.csv", ["Lot", "Inspected", "Defects"], [["A", 125, 0]])
    out = tmp_path / "rep"
    assert main(["lots", str(src), "--spec", "2%", "--report", str(out)]) == 0
    before = (out / "run.json").read_bytes()
    assert main(["report", str(out / "run.json"), "--out", str(out), "--force"]) == 2
    assert "holds the run record" in capsys.readouterr().err
    assert (out / "run.json").read_bytes() == before
