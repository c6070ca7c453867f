"""The audit report end to end: a real store built by the real pipeline, the report written from it,
and the page opened in headless Chromium (Debian's ``chromium`` package, installed by
``.ci/install-chromium.sh``).

The store holds five years (2000-2004) of the invented demo market for both curves: its planted
defects of those years (a garbled line, a unit slip that shows as a jump, a missing day) and the
2001-2002 inversion give every section something to show.

How the browser test proves that no request left the machine, three ways over:
1. Chromium runs in a fresh network namespace (``unshare --net``) whose only interface is a loopback
   that is down: there is no route off the machine for anything the browser might try.
2. Over the DevTools protocol (on a pipe, not a port) the test records every request the page makes
   (``Network.requestWillBeSent``) and asserts that each is the report file itself or an inline
   ``data:`` image. A control page with one external image proves the recorder does see such a
   request (so the check can fail).
3. Chromium's own network log (``--log-net-log``) must show no socket connection that succeeded to
   an address other than loopback, whatever the browser's background services attempted; host
   resolution is mapped to "not found" and the proxy points at a closed local port as well.
"""

from __future__ import annotations

import base64
import hashlib
import io
import json
import os
import re
import select
import shutil
import subprocess
import time
import unicodedata
from html.parser import HTMLParser
from pathlib import Path

import duckdb
import numpy as np
import pytest
from PIL import Image

from flows.audit_step import run_audit
from flows.build_step import run_build
from flows.check_step import accept_day, run_checks
from flows.load_step import load_files
from flows.realize_step import run_realize
from flows.report_step import write_report
from pipeline.audit.fixed_b import critical_value, pvalue_two_sided
from pipeline.config import load_config
from pipeline.demo import demo_config_toml, generate_market, render_feed
from pipeline.report import SECTIONS
from tests.conftest import run_cli

CHROMIUM = "/usr/bin/chromium"
YEARS = range(2000, 2005)
WIDTH = 1200


# ---- the store and the report -------------------------------------------------------------------

@pytest.fixture(scope="module")
def demo_store(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """Five years of the demo market through load, check, build, realize and audit; returns the config."""
    root = tmp_path_factory.mktemp("report-store")
    files, _ = render_feed(generate_market())
    (root / "afterward.toml").write_text(demo_config_toml(), encoding="utf-8")
    cfg = load_config(root / "afterward.toml")
    cfg.inbox.mkdir(parents=True, exist_ok=True)
    paths = []
    for name, content in files.items():
        if any(name.startswith(f"{c}_{y}") for c in ("govt", "swap") for y in YEARS):
            (cfg.inbox / name).write_bytes(content)
            paths.append(cfg.inbox / name)
    load_files(cfg, sorted(paths))
    run_checks(cfg)
    # one override and one what-if build, so the overrides section has something of each to list
    with duckdb.connect(str(cfg.store_path), read_only=True) as con:
        curve, day = con.execute("SELECT curve, CAST(min(as_of) AS VARCHAR) FROM open_findings WHERE severity = "
                                 "'reject' GROUP BY curve ORDER BY curve LIMIT 1").fetchone()
    assert accept_day(cfg, curve, day, "level confirmed against the source file") > 0
    run_build(cfg)
    run_build(cfg, "swap", "2002-01-01", "2002-02-28", method="nss")
    run_realize(cfg)
    run_audit(cfg)
    return root / "afterward.toml"


@pytest.fixture(scope="module")
def report(demo_store: Path, tmp_path_factory: pytest.TempPathFactory) -> Path:
    cfg = load_config(demo_store)
    return write_report(cfg, tmp_path_factory.mktemp("report-out"))


def _store(config: Path) -> duckdb.DuckDBPyConnection:
    return duckdb.connect(str(config.parent / "afterward.duckdb"), read_only=True)


# ---- the page as text ---------------------------------------------------------------------------

def test_report_is_self_contained(report: Path) -> None:
    text = report.read_text(encoding="utf-8")
    for forbidden in ("http://", "https://", "<script", "@import", "<link", "<iframe", "<object", "<embed"):
        assert forbidden not in text.lower(), forbidden
    # url(...) appears only as SVG references to ids inside the page (clip paths)
    outside = [u for u in re.findall(r"url\(([^)]*)\)", text) if not u.startswith("#")]
    assert outside == []
    # every href / src is a fragment link or inline data
    for ref in re.findall(r'(?:href|src)="([^"]*)"', text):
        assert ref.startswith(("#", "data:image/png;base64,")), ref[:40]
    assert "Content-Security-Policy" in text and "default-src 'none'" in text
    size_mb = len(text.encode("utf-8")) / 1e6
    assert size_mb < 5.0, f"{size_mb:.2f} MB"


def test_report_provenance_matches_the_store_and_the_files(demo_store: Path, report: Path) -> None:
    text = report.read_text(encoding="utf-8")
    with _store(demo_store) as con:
        ids = con.execute("SELECT min(load_id), max(load_id), count(*) FROM load_log "
                          "WHERE status = 'loaded'").fetchone()
        schema = con.execute("SELECT max(version) FROM schema_migration").fetchone()[0]
    assert f"<strong>{ids[2]:,}</strong> loaded file(s), load ids {ids[0]:,} to {ids[1]:,}" in text
    assert f"<dt>Store schema version</dt><dd>{schema}</dd>" in text
    # the fingerprint, recomputed here from the bytes of the files on disk (hashlib, not the store)
    inbox = demo_store.parent / "inbox"
    digests = sorted(hashlib.sha256(p.read_bytes()).hexdigest() for p in inbox.iterdir() if p.is_file())
    assert len(digests) == ids[2]
    expected = hashlib.sha256("\n".join(digests).encode("ascii")).hexdigest()
    assert expected in text
    for heading in ("Curves and conventions", "Input files", "This report"):
        assert heading in text
    assert "monotone_convex" in text and "ACT/365F" in text and "semiannual" in text


def _results_row(text: str, curve: str, start: str, tenor: str) -> list[str]:
    """The cells of one row of a curve's test-results table."""
    part = text.split(f'<span class="curve">Curve {curve}</span>')[3]  # 0 before, 1 history, 2 forwards, 3 errors
    part = part.split('<table class="results">')[1].split("</table>")[0]
    for row in re.findall(r'<tr class="has-verdict">(.*?)</tr>', part):
        cells = re.findall(r"<td[^>]*>(.*?)</td>", row)
        if cells[0] == start and cells[1] == tenor:
            return cells
    raise AssertionError(f"no row {start} {tenor}")


@pytest.mark.parametrize(("curve", "start", "tenor", "s_m", "t_m"),
                         [("govt", "1Y", "1Y", 12, 12), ("swap", "6M", "3M", 6, 3)], ids=["govt-1Yx1Y", "swap-6Mx3M"])
def test_report_numbers_match_a_plain_recomputation(demo_store: Path, report: Path, curve: str, start: str,
                                                    tenor: str, s_m: int, t_m: int) -> None:
    text = report.read_text(encoding="utf-8")
    cells = _results_row(text, curve, start, tenor)
    with _store(demo_store) as con:
        errors = con.execute("SELECT error_bp, rw_error_bp FROM outcomes WHERE curve = ? AND start_months = ? AND "
                             "tenor_months = ?", [curve, s_m, t_m]).df()
        se, lags, hac_t = con.execute("SELECT hac_se_bp, lags, hac_t FROM audit_result WHERE curve = ? AND "
                                      "start_months = ? AND tenor_months = ? AND regime = 'all'",
                                      [curve, s_m, t_m]).fetchone()
    # plain pandas over the outcomes view: n, mean error, RMSE of forward and of no-change
    mean = errors["error_bp"].mean()
    n, h = len(errors), lags + 1
    assert cells[2] == f"{n:,}"
    assert cells[3] == f"{n / h:,.1f}" + (" *" if n / h < 10 else "")  # independent periods, n over the overlap
    assert cells[4] == f"{mean:+.1f}"
    assert cells[8] == f"{np.sqrt((errors['error_bp'] ** 2).mean()):.1f}"
    assert cells[9] == f"{np.sqrt((errors['rw_error_bp'] ** 2).mean()):.1f}"
    # the HAC interval is mean +/- c standard errors, with the standard error the audit stored and c
    # the overlap-aware fixed-b 5 % value of (n, h) (pipeline.audit.fixed_b, its own tests hold it)
    c = critical_value(n, h)
    assert c > 1.96
    assert cells[5] == f"{mean - c * se:+.1f} to {mean + c * se:+.1f}"
    # the bias p is the fixed-b p of the stored HAC t (pipeline.audit.fixed_b, its own tests hold it)
    p = pvalue_two_sided(hac_t, n, h)
    assert cells[7] == ("&lt; 0.001" if p < 0.001 else f"{p:.3f}")


def test_report_lists_the_store_s_acceptances_and_what_if_builds(demo_store: Path, report: Path) -> None:
    text = report.read_text(encoding="utf-8")
    part = text[text.index('<section id="overrides">'):text.index('<section id="cautions">')]
    with _store(demo_store) as con:
        acc = con.execute("SELECT curve, as_of, accepted_by, reason FROM acceptance_in_force").fetchall()
        whatif = con.execute("SELECT scenario, count(DISTINCT as_of), min(as_of), max(as_of) FROM forward_built "
                             "WHERE scenario <> 'official' GROUP BY scenario").fetchall()
    assert len(acc) == 1 and len(whatif) == 1
    curve, day, who, reason = acc[0]
    assert re.search(rf"<td>{curve}</td><td class=\"n\">{day:%Y-%m-%d}</td><td>[^<]*reject[^<]*</td><td>{who}</td>",
                     part)
    assert f"<td>{reason}</td><td>in force</td>" in part
    scenario, days, lo, hi = whatif[0]
    assert (f'<td>{scenario}</td><td>nss</td>' in part and f'<td class="n">{days:,}</td><td class="n">{lo:%Y-%m-%d}'
            f'</td><td class="n">{hi:%Y-%m-%d}</td>' in part)


def test_cli_writes_the_report_beside_the_config(demo_store: Path) -> None:
    before = set((demo_store.parent / "reports").glob("*.html")) if (demo_store.parent / "reports").exists() else set()
    done = run_cli("--config", str(demo_store), "report", cwd=demo_store.parent)
    assert done.returncode == 0, done.stderr
    path = Path(done.stdout.strip().splitlines()[-1])
    assert path.parent == demo_store.parent / "reports"
    assert path.is_file() and path not in before
    assert path.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")


def test_cli_report_for_one_curve_and_a_window(demo_store: Path, tmp_path: Path) -> None:
    done = run_cli("--config", str(demo_store), "report", "--out", str(tmp_path), "--curve", "govt",
                   "--from", "2001-01-01", "--to", "2002-12-31", cwd=demo_store.parent)
    assert done.returncode == 0, done.stderr
    text = Path(done.stdout.strip().splitlines()[-1]).read_text(encoding="utf-8")
    assert "Curve govt" in text and "Curve swap" not in text
    assert "computed for this report&#x27;s date window" in text
    with _store(demo_store) as con:
        e = con.execute("SELECT error_bp FROM outcomes WHERE curve = 'govt' AND start_months = 6 AND "
                        "tenor_months = 12 AND as_of BETWEEN DATE '2001-01-01' AND DATE '2002-12-31'").df()
        days = con.execute("SELECT min(as_of), max(as_of) FROM quotes WHERE curve = 'govt' AND as_of BETWEEN "
                           "DATE '2001-01-01' AND DATE '2002-12-31'").fetchone()
        files = con.execute("SELECT count(DISTINCT load_id), min(load_id), max(load_id) FROM quote_version "
                            "WHERE curve = 'govt' AND superseded_at IS NULL AND as_of BETWEEN DATE '2001-01-01' "
                            "AND DATE '2002-12-31'").fetchone()
    cells = _results_row(text, "govt", "6M", "1Y")
    assert cells[2] == f"{len(e):,}" and cells[4] == f"{e['error_bp'].mean():+.1f}"
    assert f"{days[0]:%Y-%m-%d} to {days[1]:%Y-%m-%d}" in text
    # provenance and rejected rows are those of the files the window rests on (the garbled line of
    # 2003-07 is outside it)
    assert f"<strong>{files[0]:,}</strong> loaded file(s), load ids {files[1]:,} to {files[2]:,}" in text
    assert "govt_2003-07.csv" not in text and "No input row was rejected." in text


def test_unknown_curve_is_refused_by_the_cli(demo_store: Path) -> None:
    done = run_cli("--config", str(demo_store), "report", "--curve", "nope", cwd=demo_store.parent)
    assert done.returncode == 2
    assert "unknown curve" in (done.stdout + done.stderr) and "Traceback" not in done.stderr


# ---- the page in a browser ----------------------------------------------------------------------

class DevTools:
    """Chromium's DevTools protocol over ``--remote-debugging-pipe`` (fd 3 in, fd 4 out, NUL-framed JSON)."""

    def __init__(self, args: list[str], stderr_path: Path) -> None:
        to_child_r, to_child_w = os.pipe()
        from_child_r, from_child_w = os.pipe()
        # move the child's ends clear of 3 and 4 so that the dup2s below cannot clobber one another
        hi_r, hi_w = (os.dup2(fd, 100 + i, inheritable=False) for i, fd in enumerate((to_child_r, from_child_w)))

        def wire() -> None:
            os.dup2(hi_r, 3)
            os.dup2(hi_w, 4)

        self._err = stderr_path.open("wb")
        self.proc = subprocess.Popen(args, stdin=subprocess.DEVNULL, stdout=self._err, stderr=self._err,
                                     preexec_fn=wire, close_fds=False)  # fds 3, 4 are the only inheritable ones
        for fd in (to_child_r, from_child_w, hi_r, hi_w):
            os.close(fd)
        self._w, self._r = to_child_w, from_child_r
        self._buf = b""
        self._id = 0
        self.events: list[dict] = []

    def _read_message(self, deadline: float) -> dict:
        while b"\0" not in self._buf:
            left = deadline - time.monotonic()
            if left <= 0 or self.proc.poll() is not None and not select.select([self._r], [], [], 0)[0]:
                raise TimeoutError("no answer from Chromium's DevTools pipe")
            ready, _, _ = select.select([self._r], [], [], min(left, 1.0))
            if ready:
                chunk = os.read(self._r, 1 << 20)
                if not chunk:
                    raise EOFError("Chromium closed its DevTools pipe")
                self._buf += chunk
        msg, self._buf = self._buf.split(b"\0", 1)
        return json.loads(msg)

    def call(self, method: str, params: dict | None = None, session: str | None = None,
             timeout: float = 30.0) -> dict:
        self._id += 1
        msg: dict = {"id": self._id, "method": method, "params": params or {}}
        if session:
            msg["sessionId"] = session
        os.write(self._w, json.dumps(msg).encode() + b"\0")
        deadline = time.monotonic() + timeout
        while True:
            m = self._read_message(deadline)
            if m.get("id") == self._id:
                if "error" in m:
                    raise RuntimeError(f"{method}: {m['error']}")
                return m.get("result", {})
            self.events.append(m)

    def wait_for(self, method: str, timeout: float = 30.0) -> dict:
        deadline = time.monotonic() + timeout
        for i, m in enumerate(self.events):
            if m.get("method") == method:
                return self.events.pop(i)
        while True:
            m = self._read_message(deadline)
            if m.get("method") == method:
                return m
            self.events.append(m)

    def requests(self) -> list[str]:
        return [m["params"]["request"]["url"] for m in self.events if m.get("method") == "Network.requestWillBeSent"]

    def close(self) -> None:
        try:
            self.call("Browser.close", timeout=10)
        except (RuntimeError, TimeoutError, EOFError, OSError):
            pass
        try:
            self.proc.wait(timeout=15)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        os.close(self._w)
        os.close(self._r)
        self._err.close()


def _network_namespace() -> list[str]:
    """The command prefix that runs Chromium in a new network namespace of its own."""
    unshare = shutil.which("unshare")
    if unshare is None:
        pytest.fail("the browser test needs 'unshare' (util-linux) to give Chromium a private network namespace")
    prefix = [unshare, "--net"] + ([] if os.geteuid() == 0 else ["--map-root-user"])
    probe = subprocess.run([*prefix, "true"], capture_output=True, text=True)
    if probe.returncode != 0:
        pytest.fail(f"cannot make a network namespace for Chromium ({' '.join(prefix)}): {probe.stderr.strip()}")
    return prefix


PAGE_FACTS = """JSON.stringify((() => {
  const box = el => { const b = el.getBoundingClientRect();
                      return {x: b.left + scrollX, y: b.top + scrollY, w: b.width, h: b.height}; };
  return {
    headings: [...document.querySelectorAll('h2')].map(h => h.textContent.trim()),
    subheadings: [...document.querySelectorAll('h3, h4')].map(h => h.textContent.trim()),
    charts: [...document.querySelectorAll('figure.chart')].map(f => ({id: f.id, box: box(f.querySelector('svg'))})),
    svgs: document.querySelectorAll('svg').length,
    width: document.documentElement.scrollWidth,
    height: document.documentElement.scrollHeight,
  };
})())"""


def _open(browser: DevTools, session: str, path: Path) -> None:
    browser.call("Page.navigate", {"url": path.as_uri()}, session)
    browser.wait_for("Page.loadEventFired", timeout=30)


def _chart_has_drawn(img: Image.Image, box: dict) -> tuple[float, float, int]:
    """(share of non-white pixels, share of coloured pixels, distinct colours) under one chart."""
    crop = np.asarray(img.crop((int(box["x"]), int(box["y"]), int(box["x"] + box["w"]),
                                int(box["y"] + box["h"]))).convert("RGB")).astype(int)
    pixels = crop.reshape(-1, 3)
    inked = (pixels.min(axis=1) < 235).mean()
    # data are drawn in the Okabe-Ito hues or cividis; axes, grid and text are grey: colour means data
    coloured = ((pixels.max(axis=1) - pixels.min(axis=1)) > 60).mean()
    distinct = len(np.unique(pixels[:: max(1, len(pixels) // 200_000)], axis=0))
    return float(inked), float(coloured), distinct


def test_report_renders_in_headless_chromium(report: Path, tmp_path: Path) -> None:
    if not os.access(CHROMIUM, os.X_OK):
        pytest.fail(f"{CHROMIUM} is missing: the browser test needs Debian's chromium package "
                    "(run .ci/install-chromium.sh, as the test set-up does)")
    netlog = tmp_path / "netlog.json"
    args = [*_network_namespace(), CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
            "--no-first-run", "--disable-background-networking", "--disable-component-update", "--disable-sync",
            "--disable-extensions", "--disable-default-apps", "--no-default-browser-check", "--mute-audio",
            f"--user-data-dir={tmp_path / 'profile'}", "--host-resolver-rules=MAP * ~NOTFOUND",
            "--proxy-server=127.0.0.1:9", f"--log-net-log={netlog}", "--remote-debugging-pipe", "about:blank"]
    browser = DevTools(args, tmp_path / "chromium.log")
    control = tmp_path / "control.html"
    control.write_text('<!DOCTYPE html><p>control</p><img src="http://example.invalid/probe.png">', encoding="utf-8")
    try:
        target = browser.call("Target.createTarget", {"url": "about:blank"})["targetId"]
        session = browser.call("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        browser.call("Network.enable", {}, session)
        browser.call("Page.enable", {}, session)
        browser.call("Emulation.setDeviceMetricsOverride",
                     {"width": WIDTH, "height": 900, "deviceScaleFactor": 1, "mobile": False}, session)
        _open(browser, session, report)
        facts = json.loads(browser.call("Runtime.evaluate", {"expression": PAGE_FACTS, "returnByValue": True},
                                        session)["result"]["value"])
        height = int(facts["height"])
        browser.call("Emulation.setDeviceMetricsOverride",
                     {"width": WIDTH, "height": height, "deviceScaleFactor": 1, "mobile": False}, session)
        shot = browser.call("Page.captureScreenshot", {"format": "png", "captureBeyondViewport": True,
                                                       "clip": {"x": 0, "y": 0, "width": WIDTH, "height": height,
                                                                "scale": 1}}, session, timeout=60)
        page_requests = browser.requests()
        browser.events.clear()
        _open(browser, session, control)
        time.sleep(0.5)
        browser.call("Runtime.evaluate", {"expression": "1"}, session)  # drains the events sent meanwhile
        control_requests = browser.requests()
    finally:
        browser.close()

    img = Image.open(io.BytesIO(base64.b64decode(shot["data"])))
    img.save(tmp_path / "report.png")  # kept in pytest's tmp folder for a person to look at
    assert img.size == (WIDTH, height)

    # every section heading, in order
    expected = [heading for _, heading in SECTIONS]
    found = [re.sub(r"^\d+\s*", "", h) for h in facts["headings"]]
    assert found == expected
    assert facts["width"] <= WIDTH, "the page is wider than the window"

    # the summary per curve, the overrides' two lists and the sign-off are there
    for sub in ("govt", "swap", "Accepted days", "What-if builds"):
        assert sub in facts["subheadings"], sub

    # every chart: findings, then per curve history and the pairs' spreads, forwards, error (by horizon,
    # RMSE, over time) and premium (over time, by regime)
    ids = [c["id"] for c in facts["charts"]]
    assert ids == ["fig-findings", "fig-history-0", "fig-spreads-0", "fig-history-1", "fig-spreads-1",
                   "fig-forwards-0", "fig-forwards-1", "fig-errors-0", "fig-rmse-0", "fig-error-time-0",
                   "fig-errors-1", "fig-rmse-1", "fig-error-time-1", "fig-premium-0", "fig-premium-regime-0",
                   "fig-premium-1", "fig-premium-regime-1"]
    assert facts["svgs"] == len(ids)
    for chart in facts["charts"]:
        box = chart["box"]
        assert box["w"] > 600 and box["h"] > 150, chart
        inked, coloured, distinct = _chart_has_drawn(img, box)
        assert inked > 0.03, (chart["id"], inked)
        # a blank chart has no coloured pixel at all (axes and text are grey); the sparsest drawn one
        # is the premium chart, whose panels for 1-year-ahead and longer starts have no band (the
        # 250-day window holds about one forecast period) and only their line: about 0.5 %
        assert coloured > 0.003, (chart["id"], coloured)
        assert distinct > 30, (chart["id"], distinct)

    # 2. the page asked for itself and inline images only; the recorder does see an outside request
    assert page_requests and page_requests[0] == report.as_uri()
    assert all(u == report.as_uri() or u.startswith("data:") for u in page_requests), page_requests
    assert any(u.startswith("http://example.invalid/") for u in control_requests), control_requests

    # 3. Chromium's network log: no socket reached anything but loopback
    log = json.loads(netlog.read_text(encoding="utf-8"))
    names = {v: k for k, v in log["constants"]["logEventTypes"].items()}
    attempts: dict[tuple, dict] = {}  # a connect's begin and end events share its source id
    for e in log["events"]:
        kind = names.get(e["type"])
        if kind in ("TCP_CONNECT", "TCP_CONNECT_ATTEMPT", "SOCKET_CONNECT", "UDP_CONNECT"):
            attempts.setdefault((kind, e["source"]["id"]), {}).update(e.get("params") or {})
    loopback = re.compile(r"^(127\.|\[::1\])")
    reached = [p for p in attempts.values()
               if p.get("net_error", 0) == 0
               and any(not loopback.match(a) for a in [p.get("address", "")] + p.get("address_list", []) if a)]
    assert reached == [], reached



# ---- the page printed -------------------------------------------------------------------------------

class _Printed(HTMLParser):
    """What a printed copy must hold: every heading, details summary and table caption, each table's first
    header cell, and the first cell of the last row of each table inside a collapsed <details>."""

    WATCH = ("h2", "h3", "h4", "caption", "summary")

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.texts: list[str] = []
        self._open: list[list] = []  # [tag, text parts]
        self._details = 0
        self._first_th: bool = False
        self._row: list[str] = []
        self._cell: list[str] | None = None
        self.hidden_last_rows: list[str] = []
        self._secno = False

    def handle_starttag(self, tag: str, attrs: list) -> None:
        if tag in self.WATCH:
            self._open.append([tag, []])
        if tag == "span" and ("class", "secno") in attrs:
            self._secno = True
        if tag == "details":
            self._details += 1
        if tag == "table":
            self._first_th = True
            self._last_row: list[str] = []
        if tag == "th" and self._first_th:
            self._open.append(["th", []])
        if tag == "tr":
            self._row = []
        if tag == "td":
            self._cell = []

    def handle_endtag(self, tag: str) -> None:
        if tag == "span" and self._secno:
            self._secno = False
        if self._open and self._open[-1][0] == tag:
            _, parts = self._open.pop()
            text = "".join(parts).strip()
            if text:
                self.texts.append(text)
            if tag == "th":
                self._first_th = False
        if tag == "td" and self._cell is not None:
            self._row.append("".join(self._cell).strip())
            self._cell = None
        if tag == "tr" and self._row:
            self._last_row = self._row
        if tag == "table" and self._details and self._last_row:
            self.hidden_last_rows.append(self._last_row[0])
        if tag == "details":
            self._details -= 1

    def handle_data(self, data: str) -> None:
        if self._secno:
            return
        for _, parts in self._open:
            parts.append(data)
        if self._cell is not None:
            self._cell.append(data)


def _squeeze(text: str) -> str:
    """Case, spacing and line breaks dropped (print wraps lines, letter-spacing splits words, CSS
    upper-cases headings), ligatures split (NFKC): what is left is the words' letters in order."""
    return re.sub(r"\s+", "", unicodedata.normalize("NFKC", text)).lower()


def test_report_prints_every_section_and_table(report: Path, tmp_path: Path) -> None:
    if not os.access(CHROMIUM, os.X_OK) or shutil.which("pdftotext") is None:
        pytest.fail("the print test needs Debian's chromium and poppler-utils (pdftotext): run "
                    ".ci/install-chromium.sh")
    pdf = tmp_path / "report.pdf"
    done = subprocess.run([*_network_namespace(), CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu",
                           "--no-first-run", "--disable-background-networking", "--disable-component-update",
                           f"--user-data-dir={tmp_path / 'profile'}", "--no-pdf-header-footer",
                           f"--print-to-pdf={pdf}", report.as_uri()], capture_output=True, text=True, timeout=300)
    assert pdf.is_file() and pdf.stat().st_size > 0, done.stderr[-2000:]
    printed = _squeeze(subprocess.run(["pdftotext", "-raw", str(pdf), "-"], capture_output=True, text=True,
                                      check=True).stdout)
    page = _Printed()
    page.feed(report.read_text(encoding="utf-8"))
    for _, heading in SECTIONS:
        assert _squeeze(heading) in printed, heading
    assert len(page.texts) > 40
    missing = [t for t in page.texts if _squeeze(t) not in printed]
    assert missing == []
    # the tables of collapsed <details> print in full: the last row of each is on paper
    assert page.hidden_last_rows
    assert [c for c in page.hidden_last_rows if _squeeze(c) not in printed] == []
    # each section starts a page: its heading opens a page of the PDF
    pages = subprocess.run(["pdftotext", "-raw", str(pdf), "-"], capture_output=True, text=True,
                           check=True).stdout.split("\f")
    openers = [_squeeze(p)[:120] for p in pages]
    for _, heading in SECTIONS:
        assert any(_squeeze(heading) in o for o in openers), heading
