"""The HTML report in a real browser: headless Chromium driven over the DevTools protocol (no extra packages).

Chromium is started with ``--remote-debugging-pipe`` (commands on fd 3,
replies on fd 4, NUL-separated JSON) and the flags for a closed network.
The test loads ``report.html`` and a lab page from ``file://``, fails on
any console error or uncaught exception, checks that every figure has a
non-zero rendered size, and saves a screenshot of the first screen in the
test's temporary folder. Without Chromium the tests are skipped with the
reason (``.ci/run`` installs the Debian package ``chromium``).
"""

from __future__ import annotations

import base64
import fcntl
import json
import os
import select
import shutil
import subprocess
import time
from pathlib import Path

import pytest

from roundscore.outputs.report import REPORT_NAME, lab_file_name

CHROMIUM_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                  "--disable-background-networking", "--disable-component-update", "--disable-sync",
                  "--disable-default-apps", "--disable-extensions", "--mute-audio", "--hide-scrollbars"]
#: Seconds to wait for one DevTools reply (common practice: generous for a cold start on CI).
TIMEOUT = 60.0


def _chromium() -> str | None:
    for name in ("chromium", "chromium-browser", "google-chrome"):
        path = shutil.which(name)
        if path:
            return path
    return None


class Browser:
    """A headless Chromium with one page, driven over ``--remote-debugging-pipe``."""

    def __init__(self, exe: str, profile: Path, width: int = 1280, height: int = 900) -> None:
        to_child_r, self._to_child = os.pipe()
        self._from_child, from_child_w = os.pipe()

        # The child reads commands on fd 3 and writes replies on fd 4. Copies of the pipe ends above 9 are
        # moved there after the fork (so neither overwrites the other); the originals close on exec.
        r_hi = fcntl.fcntl(to_child_r, fcntl.F_DUPFD_CLOEXEC, 10)
        w_hi = fcntl.fcntl(from_child_w, fcntl.F_DUPFD_CLOEXEC, 10)

        def fds() -> None:
            os.dup2(r_hi, 3)
            os.dup2(w_hi, 4)

        self.proc = subprocess.Popen(
            [exe, *CHROMIUM_FLAGS, f"--user-data-dir={profile}", "--remote-debugging-pipe",
             f"--window-size={width},{height}", "about:blank"],
            stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
            preexec_fn=fds, close_fds=False)
        os.close(r_hi)
        os.close(w_hi)
        os.close(to_child_r)
        os.close(from_child_w)
        self._buf = b""
        self._id = 0
        self.events: list[dict] = []
        target = self.call("Target.createTarget", url="about:blank")["targetId"]
        self.session = self.call("Target.attachToTarget", targetId=target, flatten=True)["sessionId"]
        for domain in ("Page", "Runtime", "Log"):
            self.call(f"{domain}.enable", session=True)
        self.call("Emulation.setDeviceMetricsOverride", session=True, width=width, height=height,
                  deviceScaleFactor=1, mobile=False)

    def _read(self, deadline: float) -> dict:
        while b"\0" not in self._buf:
            left = deadline - time.monotonic()
            if left <= 0 or not select.select([self._from_child], [], [], left)[0]:
                raise TimeoutError("no reply from Chromium")
            chunk = os.read(self._from_child, 1 << 20)
            if not chunk:
                raise RuntimeError("Chromium closed the pipe: "
                                   + (self.proc.stderr.read(2000).decode(errors="replace") if self.proc.stderr else ""))
            self._buf += chunk
        raw, self._buf = self._buf.split(b"\0", 1)
        return json.loads(raw)

    def call(self, method: str, session: bool = False, **params) -> dict:
        self._id += 1
        msg = {"id": self._id, "method": method, "params": params}
        if session:
            msg["sessionId"] = self.session
        os.write(self._to_child, json.dumps(msg).encode() + b"\0")
        deadline = time.monotonic() + TIMEOUT
        while True:
            reply = self._read(deadline)
            if reply.get("id") == self._id:
                if "error" in reply:
                    raise RuntimeError(f"{method}: {reply['error']}")
                return reply.get("result", {})
            self.events.append(reply)

    def wait_for(self, method: str) -> dict:
        deadline = time.monotonic() + TIMEOUT
        for i, ev in enumerate(self.events):
            if ev.get("method") == method:
                return self.events.pop(i)
        while True:
            ev = self._read(deadline)
            if ev.get("method") == method:
                return ev
            self.events.append(ev)

    def open(self, url: str) -> None:
        self.events.clear()
        self.call("Page.navigate", session=True, url=url)
        self.wait_for("Page.loadEventFired")

    def evaluate(self, expression: str):
        res = self.call("Runtime.evaluate", session=True, expression=expression, returnByValue=True)
        if "exceptionDetails" in res:
            raise RuntimeError(f"script failed: {res['exceptionDetails']}")
        return res["result"].get("value")

    def errors(self) -> list[str]:
        """Console errors, uncaught exceptions and error log entries seen since the last ``open``."""
        out = []
        for ev in self.events:
            m, p = ev.get("method"), ev.get("params", {})
            if m == "Runtime.consoleAPICalled" and p.get("type") in ("error", "assert"):
                out.append("console: " + " ".join(str(a.get("value", a.get("description", ""))) for a in p["args"]))
            elif m == "Runtime.exceptionThrown":
                out.append("exception: " + json.dumps(p.get("exceptionDetails", {}))[:500])
            elif m == "Log.entryAdded" and p.get("entry", {}).get("level") == "error":
                out.append("log: " + p["entry"].get("text", "") + " " + p["entry"].get("url", ""))
        return out

    def screenshot(self, path: Path) -> None:
        data = self.call("Page.captureScreenshot", session=True, format="png")["data"]
        path.write_bytes(base64.b64decode(data))

    def close(self) -> None:
        try:
            self.call("Browser.close")
        except Exception:
            pass
        try:
            self.proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        for fd in (self._to_child, self._from_child):
            try:
                os.close(fd)
            except OSError:
                pass


@pytest.fixture(scope="module")
def browser(tmp_path_factory):
    exe = _chromium()
    if exe is None:
        reason = "Chromium is not installed (apt-get install chromium); the browser test cannot run"
        print(f"SKIPPED: {reason}")
        pytest.skip(reason)
    try:
        b = Browser(exe, tmp_path_factory.mktemp("chromium-profile"))
    except Exception as exc:  # a browser that will not start here is a reason, not a pass
        reason = f"Chromium at {exe} could not be started: {exc}"
        print(f"SKIPPED: {reason}")
        pytest.skip(reason)
    yield b
    b.close()


@pytest.fixture
def demo_report(scored_demo):
    """The report and lab pages of the invented demo round, as the pipeline wrote them (shared: read only)."""
    return scored_demo.evaluation, scored_demo.out


FIGURE_SIZES = """JSON.stringify(Array.from(document.querySelectorAll('figure svg')).map(s => {
  const r = s.getBoundingClientRect(); return [s.closest('figure').id, r.width, r.height]; }))"""


@pytest.mark.parametrize("page", ["report", "lab"])
def test_page_renders_without_errors(browser, demo_report, tmp_path, page):
    ev, out = demo_report
    path = out / REPORT_NAME if page == "report" else out / "labs" / lab_file_name(ev.labs[0])
    browser.open(path.as_uri())
    assert browser.errors() == []
    sizes = json.loads(browser.evaluate(FIGURE_SIZES))
    assert len(sizes) >= 2 * len(ev.measurands) - 1  # ranked chart and density for (nearly) every measurand
    flat = [s for s in sizes if not (s[1] > 50 and s[2] > 50)]
    assert flat == []
    assert browser.evaluate("document.querySelectorAll('svg image, img').length") == 0  # all figures inline
    shot = tmp_path / f"{page}-first-screen.png"
    browser.screenshot(shot)
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and shot.stat().st_size > 10_000


def test_lab_page_marks_own_bar_and_keeps_others_anonymous(browser, demo_report):
    ev, out = demo_report
    lab = ev.labs[0]
    browser.open((out / "labs" / lab_file_name(lab)).as_uri())
    marks = json.loads(browser.evaluate(
        "JSON.stringify(Array.from(document.querySelectorAll('g.lab-mark')).map(g => {"
        "const r = g.getBoundingClientRect(); return [g.getAttribute('aria-label'), r.width, r.height]; }))"))
    assert marks and all(label.endswith(f"({lab})") and w > 0 and h > 0 for label, w, h in marks)
    text = browser.evaluate("document.body.innerText")
    own = ev.participants[lab].name
    others = [p.name for code, p in ev.participants.items() if code != lab]
    assert own in text and not [n for n in others if n in text]


def test_report_prints_to_pdf(browser, demo_report, tmp_path):
    """The print stylesheet gives a multi-page PDF (sections start on new pages)."""
    _ev, out = demo_report
    browser.open((out / REPORT_NAME).as_uri())
    pdf = base64.b64decode(browser.call("Page.printToPDF", session=True, printBackground=True,
                                        preferCSSPageSize=True)["data"])
    (tmp_path / "report.pdf").write_bytes(pdf)
    assert pdf[:5] == b"%PDF-" and pdf.count(b"/Type /Page\n") + pdf.count(b"/Type /Page ") + \
        pdf.count(b"/Type/Page") >= 5


def test_the_checks_can_fail(browser, tmp_path):
    """A page with a console error, a script error and a collapsed figure is caught (the harness is not blind)."""
    bad = tmp_path / "bad.html"
    bad.write_text("<!DOCTYPE html><html><body><figure id='f'><svg width='0' height='0'></svg></figure>"
                   "<script>console.error('planted error'); undefinedFunction();</script></body></html>")
    browser.open(bad.as_uri())
    errors = browser.errors()
    assert any("planted error" in e for e in errors) and any(e.startswith("exception") for e in errors)
    assert json.loads(browser.evaluate(FIGURE_SIZES)) == [["f", 0, 0]]


# ------------------------------------------------------------------------------------------ printing

#: Printable width in CSS pixels (96 per inch) of each paper with the stylesheet's 12 mm side margins:
#: A4 is 210 mm wide, US Letter 8.5 in (215.9 mm).
PRINTABLE_PX = {"a4": (210 - 24) / 25.4 * 96, "letter": (215.9 - 24) / 25.4 * 96}
#: Paper size in inches for Page.printToPDF, and its PDF MediaBox in points.
PAPER_INCHES = {"a4": (210 / 25.4, 297 / 25.4), "letter": (8.5, 11.0)}
#: Page bounds for the demo (6 measurands, 31 labs; counted 2026-12-03 with headless Chromium: the report
#: 32 pages on A4 and 36 on Letter, a lab page 10 on A4 and 11 on Letter, since the sensitivity table and
#: the reported uncertainties were added): a bound, not an exact count, so that fonts may
#: differ a little; a page that stops splitting wide tables or starts cutting figures leaves it.
PAGE_BOUNDS = {"report": (20, 45), "lab": (5, 14)}

#: Elements whose right edge passes the body's (the printable width): tag, class, id, width.
OVERFLOW = """JSON.stringify((() => {
  const limit = document.body.getBoundingClientRect().right + 1;
  return Array.from(document.body.querySelectorAll('*')).filter(e => {
    const r = e.getBoundingClientRect();
    return r.width > 0 && r.right > limit && !e.closest('svg *');
  }).slice(0, 20).map(e => [e.tagName, e.className && e.className.baseVal !== undefined ? e.className.baseVal
                           : e.className, e.id, Math.round(e.getBoundingClientRect().width)]);
})())"""


def _pages(pdf: bytes) -> int:
    import re

    return len(re.findall(rb"/Type\s*/Page[^s]", pdf))


def _print(browser, paper: str) -> bytes:
    w, h = PAPER_INCHES[paper]
    return base64.b64decode(browser.call("Page.printToPDF", session=True, printBackground=True,
                                         preferCSSPageSize=True, paperWidth=w, paperHeight=h)["data"])


@pytest.mark.parametrize("paper", ["a4", "letter"])
@pytest.mark.parametrize("page", ["report", "lab"])
def test_pages_print_with_nothing_cut_off(browser, demo_report, tmp_path, page, paper):
    """Print emulation at the paper's printable width: no element is wider; the page count stays bounded."""
    ev, out = demo_report
    path = out / REPORT_NAME if page == "report" else out / "labs" / lab_file_name(ev.labs[0])
    text = path.read_text(encoding="utf-8")
    assert "size: A4;" in text  # the demo round prints on A4 ([round] paper)
    copy = tmp_path / f"{page}-{paper}.html"  # the same page on the other paper: only @page size changes
    copy.write_text(text.replace("size: A4;", "size: letter;") if paper == "letter" else text, encoding="utf-8")
    width = int(PRINTABLE_PX[paper])
    browser.call("Emulation.setDeviceMetricsOverride", session=True, width=width, height=1000,
                 deviceScaleFactor=1, mobile=False)
    browser.call("Emulation.setEmulatedMedia", session=True, media="print")
    try:
        browser.open(copy.as_uri())
        assert json.loads(browser.evaluate(OVERFLOW)) == []
        pdf = _print(browser, paper)
    finally:
        browser.call("Emulation.setEmulatedMedia", session=True, media="")
        browser.call("Emulation.setDeviceMetricsOverride", session=True, width=1280, height=900,
                     deviceScaleFactor=1, mobile=False)
    (tmp_path / f"{page}-{paper}.pdf").write_bytes(pdf)
    lo, hi = PAGE_BOUNDS[page]
    assert lo <= _pages(pdf) <= hi
    import re

    # the MediaBox width in points: the @page size was used (A4 595.3 pt, Letter 612 pt)
    box = [float(v) for v in re.search(rb"/MediaBox\s*\[([^\]]*)\]", pdf).group(1).split()]
    assert box[2] == pytest.approx(PAPER_INCHES[paper][0] * 72, abs=1.0)
    print(f"{page} on {paper}: {_pages(pdf)} pages")


def test_the_overflow_check_can_fail(browser, tmp_path):
    """A table wider than the printable width is found (the check is not blind)."""
    bad = tmp_path / "wide.html"
    bad.write_text("<!DOCTYPE html><html><body><table style='width:2000px'><tr><td>x</td></tr></table>"
                   "</body></html>")
    browser.call("Emulation.setEmulatedMedia", session=True, media="print")
    try:
        browser.open(bad.as_uri())
        assert json.loads(browser.evaluate(OVERFLOW))
    finally:
        browser.call("Emulation.setEmulatedMedia", session=True, media="")
