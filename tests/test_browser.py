"""report.html in a real browser: headless Chromium driven through chromedriver.

WebDriver is plain HTTP and JSON (W3C WebDriver), so the standard library's urllib drives it;
no browser-automation package is needed. The checks: the decision block is visible without
scrolling in a 1280 x 800 window, every figure loads, and the page logs no errors. A second
page with a broken image and a script error shows that the same checks do catch failures.

The test skips, saying why, where no Chromium and chromedriver can be found (on Debian:
``apt-get install chromium chromium-driver``; ``.ci/run`` installs them).
"""
from __future__ import annotations

import json
import shutil
import socket
import subprocess
import time
import urllib.error
import urllib.request

import pytest

BROWSERS = ("chromium", "chromium-browser", "google-chrome", "chrome")
WIDTH, HEIGHT = 1280, 800

# collects uncaught errors, failed resource loads and console.error calls from the first
# script the page runs (installed before any of the page's own content is parsed)
ERROR_HOOK = """
window.__errors = [];
window.addEventListener('error', function (e) {
  var t = e.target;
  window.__errors.push(t && t !== window && t.tagName ?
    'failed to load ' + t.tagName.toLowerCase() : String(e.message));
}, true);
window.addEventListener('unhandledrejection', function (e) {
  window.__errors.push('unhandled rejection: ' + String(e.reason));
});
var __ce = console.error;
console.error = function () {
  window.__errors.push(Array.prototype.join.call(arguments, ' '));
  return __ce.apply(console, arguments);
};
"""


def _find_tools():
    browser = next((shutil.which(b) for b in BROWSERS if shutil.which(b)), None)
    driver = shutil.which("chromedriver")
    if browser is None or driver is None:
        missing = " and ".join(n for n, p in (("Chromium", browser), ("chromedriver", driver))
                               if p is None)
        pytest.skip(f"no {missing} on this machine, so the report cannot be opened in a real "
                    "browser (Debian: apt-get install chromium chromium-driver; .ci/run "
                    "installs them)")
    return browser, driver


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class WebDriver:
    """The few W3C WebDriver commands the test needs, over HTTP."""

    def __init__(self, url: str):
        self.url = url
        self.session = None

    def call(self, method: str, path: str, body=None, timeout=60):
        data = None if body is None else json.dumps(body).encode()
        req = urllib.request.Request(self.url + path, data=data, method=method,
                                     headers={"Content-Type": "application/json"})
        try:
            with urllib.request.urlopen(req, timeout=timeout) as resp:
                return json.loads(resp.read() or b"{}").get("value")
        except urllib.error.HTTPError as e:
            raise AssertionError(f"WebDriver {method} {path}: {e.read().decode()[:500]}")

    def s(self, method, path, body=None):
        return self.call(method, f"/session/{self.session}{path}", body)

    def script(self, source: str):
        return self.s("POST", "/execute/sync", {"script": source, "args": []})


@pytest.fixture(scope="module")
def browser(tmp_path_factory):
    binary, driver_path = _find_tools()
    port = _free_port()
    log = tmp_path_factory.mktemp("chromedriver") / "driver.log"
    proc = subprocess.Popen([driver_path, f"--port={port}", f"--log-path={log}"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    wd = WebDriver(f"http://127.0.0.1:{port}")
    try:
        for _ in range(300):
            try:
                if wd.call("GET", "/status", timeout=2).get("ready"):
                    break
            except (urllib.error.URLError, ConnectionError, OSError):
                pass
            time.sleep(0.1)
        else:
            pytest.fail("chromedriver did not start within 30 s")
        profile = tmp_path_factory.mktemp("chromium-profile")
        caps = {"browserName": "chrome", "goog:chromeOptions": {
            "binary": binary,
            "args": ["--headless=new", "--no-sandbox", "--disable-gpu",
                     "--disable-dev-shm-usage", "--disable-background-networking",
                     "--disable-component-update", "--disable-sync", "--no-first-run",
                     f"--user-data-dir={profile}", f"--window-size={WIDTH},{HEIGHT}"]}}
        got = wd.call("POST", "/session", {"capabilities": {"alwaysMatch": caps}}, timeout=120)
        wd.session = got["sessionId"]
        # the error hook runs before each page's own content (Chrome DevTools protocol
        # through chromedriver)
        wd.s("POST", "/goog/cdp/execute", {"cmd": "Page.addScriptToEvaluateOnNewDocument",
                                           "params": {"source": ERROR_HOOK}})
        yield wd
    finally:
        if wd.session is not None:
            try:
                wd.call("DELETE", f"/session/{wd.session}", timeout=30)
            except Exception:
                pass
        proc.terminate()
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            proc.kill()


def _open(wd: WebDriver, path) -> dict:
    """Load ``path`` and return what the checks read from the page."""
    wd.s("POST", "/url", {"url": path.resolve().as_uri()})
    for _ in range(100):   # wait until every image has finished (loaded or failed)
        done = wd.script("return document.readyState === 'complete' && "
                         "Array.from(document.images).every(i => i.complete);")
        if done:
            break
        time.sleep(0.1)
    return wd.script("""
        var d = document.getElementById('decision');
        var r = d ? d.getBoundingClientRect() : null;
        return {viewport: [window.innerWidth, window.innerHeight],
                scrolled: window.scrollY,
                decision: r ? {top: r.top, bottom: r.bottom, height: r.height,
                               text: d.innerText} : null,
                images: Array.from(document.images).map(
                    i => ({alt: i.alt, ok: i.complete && i.naturalWidth > 0,
                           width: i.naturalWidth})),
                errors: window.__errors || ['the error hook did not run']};""")


@pytest.fixture(scope="module")
def demo_report(tmp_path_factory):
    from click.testing import CliRunner

    from pooler.cli import main
    out = tmp_path_factory.mktemp("browser") / "out"
    res = CliRunner().invoke(main, ["demo", "--out", str(out), "--attrition", "0.2",
                                    "--n", "121"], catch_exceptions=False)
    assert res.exit_code == 0, res.output
    return out / "report.html"


def test_report_in_a_real_browser(browser, demo_report):
    page = _open(browser, demo_report)
    width, height = page["viewport"]
    assert width >= WIDTH - 20 and height >= HEIGHT - 150, page["viewport"]  # the window set
    d = page["decision"]
    assert d is not None, "no element with id 'decision' in the page"
    # the whole decision block is on the first screen, without scrolling
    assert page["scrolled"] == 0 and d["top"] >= 0 and d["bottom"] <= min(HEIGHT, height), d
    doc = json.loads((demo_report.parent / "results.json").read_text(encoding="utf-8"))
    real = next(r for r in doc["plan"]["rows"] if r["scenario"] == "realistic")
    recruit = real["n_total_recruit"]
    assert f"Recruit {recruit:,} participants ({recruit // 2:,} per group" in d["text"]
    assert "realistic" in d["text"] and "If that is not feasible" in d["text"]
    # every figure loads: four figures, each decoded to a real width
    assert len(page["images"]) == 4
    assert all(i["ok"] and i["width"] > 100 for i in page["images"]), page["images"]
    assert page["errors"] == []


@pytest.mark.slow
def test_paths_report_in_a_real_browser(browser, tmp_path):
    # the report of a simulated design (the invented garden path literature): every figure
    # (a power curve per scenario and the path diagram) loads, and the page logs no errors
    from click.testing import CliRunner

    from pathlib import Path

    from pooler.cli import main
    out = tmp_path / "paths"
    sheet = Path(__file__).resolve().parents[1] / "demo_literature" / "garden_paths.csv"
    res = CliRunner().invoke(main, ["paths", str(sheet), "--design", "parallel-mediation",
                                    "--test", "joint", "--power", "0.8", "--reps", "200",
                                    "--workers", "1", "--out", str(out)],
                             catch_exceptions=False)
    assert res.exit_code == 0, res.output
    page = _open(browser, out / "report.html")
    assert page["scrolled"] == 0 and page["decision"] is None
    assert sorted(i["alt"].split(":")[0] for i in page["images"]) == [
        "Path diagram of parallel-mediation", "optimistic", "pessimistic", "realistic"]
    assert all(i["ok"] and i["width"] > 100 for i in page["images"]), page["images"]
    assert page["errors"] == []


def test_the_checks_catch_a_broken_page(browser, tmp_path):
    # the same checks on a page that is broken in each way they look for
    bad = tmp_path / "broken.html"
    bad.write_text("<!DOCTYPE html><html><body>"
                   '<div style="height:900px">filler</div><section id="decision">late</section>'
                   '<img alt="missing" src="data:image/png;base64,AAAA">'
                   "<script>console.error('boom'); undefinedFunction();</script>"
                   "</body></html>", encoding="utf-8")
    page = _open(browser, bad)
    assert page["decision"]["bottom"] > HEIGHT
    assert [i["ok"] for i in page["images"]] == [False]
    assert "boom" in page["errors"]
    assert any("undefinedFunction" in e for e in page["errors"])
    assert "failed to load img" in page["errors"]
