"""Audit reports: HTML in a real headless browser, PDF, rebuild from the run record."""

import http.server
import json
import os
import re
import shutil
import subprocess
import threading
from html.parser import HTMLParser
from pathlib import Path

import pytest
from helpers import write_csv

from qualbayes.cli import main
from qualbayes.evidence.report_folder import write_report_folder

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
                 "--prior", "history", "--seed", "5", "--report", str(out)]) == 0
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


def _browse(html: Path, tmp_path: Path) -> tuple[str, Path, list[str]]:
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
             "--disable-client-side-phishing-detection",
             "--disable-features=NetworkTimeServiceQuerying,OptimizationHints,MediaRouter"]
    try:
        dom = subprocess.run([*flags, "--dump-dom", html.as_uri()], capture_output=True,
                             text=True, timeout=120).stdout
        shot = tmp_path / "report.png"
        subprocess.run([*flags, "--window-size=1200,1800", f"--screenshot={shot}",
                        html.as_uri()], capture_output=True, timeout=120)
    finally:
        server.shutdown()
    # The browser's own background services (update and time checks) talk to its vendor's
    # hosts whatever page is open; any other request would come from the page.
    own = re.compile(r"^(https?://)?[\w.-]*\.(google\.com|googleapis\.com|gstatic\.com)"
                     r"(:\d+)?(/|$)")
    return dom, shot, [u for u in _Recorder.seen if not own.match(u)]


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
    assert page.attrs.get("data-images-loaded") == f"{n_fig}/{n_fig}"
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and shot.stat().st_size > 10_000


@needs_browser
def test_the_network_check_catches_a_page_that_fetches(tmp_path):
    # control: the same harness must see a request from a page that makes one
    page = tmp_path / "leaky.html"
    page.write_text('<html><body><img src="http://qualbayes-test.invalid/x.png"></body></html>')
    _, _, from_page = _browse(page, tmp_path)
    assert any("qualbayes-test.invalid" in u for u in from_page)


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


def _pdf_pages(path: Path) -> int:
    return len(re.findall(rb"/Type\s*/Page[^s]", path.read_bytes()))


@pytest.mark.skipif(PDFTOTEXT is None and not os.environ.get("QUALBAYES_CI"),
                    reason="pdftotext (poppler-utils) not installed (CI installs it)")
def test_pdf_pages_and_decision_table_text(history_report):
    pdf = history_report / "report.pdf"
    record = json.loads((history_report / "run.json").read_text())
    n_fig = len(list((history_report / "figures").glob("*.png")))
    pages = _pdf_pages(pdf)
    # text pages first, then one page per figure, each titled
    text = subprocess.run(["pdftotext", "-layout", str(pdf), "-"], capture_output=True,
                          text=True, check=True).stdout
    per_page = text.split("\f")[:pages]
    assert len(per_page) == pages
    figure_pages = [p for p in per_page if p.strip() and "Decision summary" not in p
                    and p.lstrip().split("\n")[0].strip().startswith(
                        ("Posterior density", "Lot-by-lot", "Prior and posterior",
                         "Rank plots"))]
    assert len(figure_pages) == n_fig
    assert pages >= n_fig + 1
    for lot in record["lots"]:
        line = next(row for row in text.splitlines() if row.strip().startswith(lot["lot"]))
        assert lot["decision"] in line
    assert "CAUTION: decision support only" in text.replace("\n", " ")


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

    from qualbayes.acceptance import assess_lots
    from qualbayes.data.lots import LotTable
    from qualbayes.evidence.lots_record import lots_record
    from qualbayes.inference import SamplerSettings

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
