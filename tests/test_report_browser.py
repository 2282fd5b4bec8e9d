"""The screening report in a real browser: headless Chromium driven through the DevTools protocol.

Chromium (the Debian package ``chromium``) is started with
``--remote-debugging-pipe``: DevTools messages are JSON terminated by a NUL
byte, read from file descriptor 3 and written to 4 (Chrome DevTools Protocol,
"Transport"). Every name resolves to nothing and the proxy is a closed port,
so no request could leave the machine; the test also asserts that the page
asked for nothing but its own file and inline ``data:`` URIs.
"""

from __future__ import annotations

import base64
import fcntl
import io
import json
import os
import queue
import shutil
import subprocess
import threading
import time
from pathlib import Path

import numpy as np
import pyogrio
import pytest

from pointsift.config import ScreenConfig
from pointsift.run import screen_file

from conftest import build_wells, write_points

pytestmark = pytest.mark.browser

CHROMIUM = shutil.which("chromium") or ("/usr/bin/chromium" if os.path.exists("/usr/bin/chromium") else None)
if CHROMIUM is None:
    pytest.skip("headless Chromium is not installed (Debian package 'chromium'; .ci/run installs it)",
                allow_module_level=True)

VIEWPORT = (1280, 900)


class DevTools:
    """A minimal DevTools-protocol client over Chromium's debugging pipe."""

    def __init__(self, profile: Path):
        to_browser_r, self._to_browser = os.pipe()
        self._from_browser, from_browser_w = os.pipe()

        def child_fds():  # the browser reads commands on fd 3 and writes replies on fd 4
            a = fcntl.fcntl(to_browser_r, fcntl.F_DUPFD, 10)
            b = fcntl.fcntl(from_browser_w, fcntl.F_DUPFD, 10)
            os.dup2(a, 3)
            os.dup2(b, 4)

        flags = [
            "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
            "--disable-background-networking", "--disable-component-update", "--disable-sync",
            "--disable-default-apps", "--disable-extensions", "--mute-audio", "--hide-scrollbars",
            f"--user-data-dir={profile}", "--host-resolver-rules=MAP * ~NOTFOUND", "--proxy-server=127.0.0.1:9",
            "--proxy-bypass-list=<-loopback>", f"--window-size={VIEWPORT[0]},{VIEWPORT[1]}",
            "--remote-debugging-pipe", "about:blank",
        ]
        # pass_fds keeps 3 and 4 open in the child, and needs them open here first
        placeholders = []
        for fd in (3, 4):
            try:
                os.fstat(fd)
            except OSError:
                placeholders.append(os.open(os.devnull, os.O_RDONLY))
        self.process = subprocess.Popen([CHROMIUM, *flags], stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
                                        stderr=subprocess.DEVNULL, preexec_fn=child_fds, pass_fds=(3, 4))
        for fd in (to_browser_r, from_browser_w, *placeholders):
            os.close(fd)
        self._next_id = 0
        self._replies: dict[int, dict] = {}
        self.events: list[dict] = []
        self._inbox: queue.Queue = queue.Queue()
        threading.Thread(target=self._read, daemon=True).start()

    def _read(self):
        buffer = b""
        while True:
            try:
                chunk = os.read(self._from_browser, 1 << 16)
            except OSError:
                chunk = b""
            if not chunk:
                self._inbox.put(None)
                return
            buffer += chunk
            while b"\0" in buffer:
                message, buffer = buffer.split(b"\0", 1)
                self._inbox.put(json.loads(message))

    def _pump(self, timeout: float) -> None:
        message = self._inbox.get(timeout=timeout)
        if message is None:
            raise RuntimeError("Chromium closed the DevTools pipe")
        if "id" in message:
            self._replies[message["id"]] = message
        else:
            self.events.append(message)

    def send(self, method: str, params: dict | None = None, session: str | None = None, timeout: float = 15.0) -> dict:
        self._next_id += 1
        ident = self._next_id
        message = {"id": ident, "method": method, "params": params or {}}
        if session:
            message["sessionId"] = session
        os.write(self._to_browser, json.dumps(message).encode() + b"\0")
        deadline = time.monotonic() + timeout
        while ident not in self._replies:
            self._pump(max(0.01, deadline - time.monotonic()))
        reply = self._replies.pop(ident)
        if "error" in reply:
            raise RuntimeError(f"{method}: {reply['error']}")
        return reply.get("result", {})

    def wait_for(self, method: str, session: str, timeout: float = 15.0) -> dict:
        deadline = time.monotonic() + timeout
        seen = 0
        while True:
            for event in self.events[seen:]:
                if event.get("method") == method and event.get("sessionId") == session:
                    return event
            seen = len(self.events)
            self._pump(max(0.01, deadline - time.monotonic()))

    def close(self) -> None:
        try:
            self.send("Browser.close", timeout=5)
        except Exception:
            pass
        try:
            self.process.wait(timeout=10)
        except subprocess.TimeoutExpired:
            self.process.kill()
            self.process.wait()
        for fd in (self._to_browser, self._from_browser):
            try:
                os.close(fd)
            except OSError:
                pass


def _layer():
    """Invented wells (see conftest) with a decimal slip, a sign error and a spike planted."""
    wells = build_wells(300, seed=21)
    wells.loc[3, "level_m"] *= 10.0
    wells.loc[33, "level_m"] = -wells.loc[33, "level_m"]
    wells.loc[120, "level_m"] += 6.0
    return wells


@pytest.fixture(scope="module")
def opened(tmp_path_factory):
    folder = tmp_path_factory.mktemp("browser")
    source = write_points(_layer(), folder / "wells.gpkg")
    report = folder / "report.html"
    screen_file(source, folder / "screened.gpkg", ScreenConfig(value="level_m", id="well_id"), report_path=report)
    browser = DevTools(folder / "profile")
    try:
        target = browser.send("Target.createTarget", {"url": "about:blank"})["targetId"]
        session = browser.send("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        for domain in ("Network", "Runtime", "Log", "Page"):
            browser.send(f"{domain}.enable", session=session)
        browser.send("Emulation.setDeviceMetricsOverride",
                     {"width": VIEWPORT[0], "height": VIEWPORT[1], "deviceScaleFactor": 1, "mobile": False}, session=session)
        browser.send("Page.navigate", {"url": report.as_uri()}, session=session)
        browser.wait_for("Page.loadEventFired", session, timeout=20)
        yield {"browser": browser, "session": session, "folder": folder, "gpkg": folder / "screened.gpkg",
               "url": report.as_uri()}
    finally:
        browser.close()


def _evaluate(opened, expression: str):
    result = opened["browser"].send("Runtime.evaluate", {"expression": expression, "returnByValue": True,
                                                         "awaitPromise": True}, session=opened["session"])
    if "exceptionDetails" in result:
        raise AssertionError(f"script failed: {result['exceptionDetails']}")
    return result["result"].get("value")


def _click(opened, selector: str) -> None:
    """A real mouse click (press and release) at the centre of the element."""
    x, y = _evaluate(opened, f"""(() => {{ const e = document.querySelector({json.dumps(selector)});
        e.scrollIntoView({{block: "center"}}); const r = e.getBoundingClientRect();
        return [r.left + r.width / 2, r.top + r.height / 2]; }})()""")
    send = opened["browser"].send
    send("Input.dispatchMouseEvent", {"type": "mouseMoved", "x": x, "y": y}, session=opened["session"])
    for kind in ("mousePressed", "mouseReleased"):
        send("Input.dispatchMouseEvent", {"type": kind, "x": x, "y": y, "button": "left", "clickCount": 1},
             session=opened["session"])


def _column(opened, index: int):
    return _evaluate(opened, f"""Array.from(document.querySelectorAll("#flagged-table tbody tr"))
        .map(r => r.cells[{index}].getAttribute("data-sort"))""")


def test_report_in_headless_chromium(opened):
    started = time.monotonic()
    # first screen, before anything is touched: written to the test folder and checked not blank
    shot = opened["browser"].send("Page.captureScreenshot", {"format": "png"}, session=opened["session"])
    raw = base64.b64decode(shot["data"])
    path = opened["folder"] / "report_first_screen.png"
    path.write_bytes(raw)
    from PIL import Image

    image = Image.open(io.BytesIO(raw)).convert("RGB")
    assert image.size == VIEWPORT
    pixels = np.asarray(image, dtype=float)
    assert pixels.std() > 20, "the first screen is blank"
    assert len(np.unique(pixels.reshape(-1, 3), axis=0)) > 100, "the first screen has almost no content"

    # every image decodes
    sizes = _evaluate(opened, """Promise.all(Array.from(document.images).map(i =>
        i.decode().then(() => [i.naturalWidth, i.naturalHeight]).catch(() => [0, 0])))""")
    assert len(sizes) >= 8
    assert all(w > 0 and h > 0 for w, h in sizes), sizes

    # the table holds the GeoPackage's suspect and review rows, strongest first
    layer = pyogrio.read_dataframe(opened["gpkg"], layer="screened")
    flagged = layer[layer["screen_status"].isin(["suspect", "review"])]
    expect = (flagged.assign(rank=flagged["screen_status"].map({"suspect": 0, "review": 1}), row=flagged.index)
              .sort_values(["rank", "screen_score", "row"], ascending=[True, False, True]))
    rows = _evaluate(opened, """Array.from(document.querySelectorAll("#flagged-table tbody tr"))
        .map(r => [Number(r.dataset.row), r.cells[1].textContent])""")
    assert [r for r, _ in rows] == expect.index.tolist()
    assert [i for _, i in rows] == expect["well_id"].tolist()
    assert len(rows) >= 3

    # a real click on the "Value" header sorts by value, largest first; a second click, smallest first
    _click(opened, '#flagged-table th[data-key="value"] button')
    values = [float(v) for v in _column(opened, 3)]
    assert values == sorted(flagged["level_m"].tolist(), reverse=True)
    assert _evaluate(opened, """document.querySelector('#flagged-table th[data-key="value"]').getAttribute("aria-sort")""") == "descending"
    _click(opened, '#flagged-table th[data-key="value"] button')
    assert [float(v) for v in _column(opened, 3)] == sorted(flagged["level_m"].tolist())
    # text column: ids in alphabetical order
    _click(opened, '#flagged-table th[data-key="id"] button')
    assert _column(opened, 1) == sorted(flagged["well_id"].tolist(), key=str.lower)

    # typing an id into the filter leaves that row alone
    target = expect["well_id"].iloc[0]
    _click(opened, "#flagged-table-filter")
    opened["browser"].send("Input.insertText", {"text": target}, session=opened["session"])
    visible = _evaluate(opened, """Array.from(document.querySelectorAll("#flagged-table tbody tr"))
        .filter(r => !r.hidden).map(r => r.cells[1].textContent)""")
    assert visible == [target]
    assert _evaluate(opened, 'document.getElementById("flagged-table-shown").textContent') == f"1 of {len(flagged)} rows shown"

    # nothing went wrong and nothing was asked of a network
    events = opened["browser"].events
    errors = [e for e in events if e.get("method") == "Runtime.exceptionThrown"]
    errors += [e for e in events if e.get("method") == "Runtime.consoleAPICalled" and e["params"]["type"] in ("error", "assert")]
    errors += [e for e in events if e.get("method") == "Log.entryAdded" and e["params"]["entry"]["level"] == "error"]
    assert errors == []
    requested = [e["params"]["request"]["url"] for e in events if e.get("method") == "Network.requestWillBeSent"]
    assert opened["url"] in requested
    assert all(url.startswith(("file:", "data:")) for url in requested), [u[:60] for u in requested]
    assert time.monotonic() - started < 30


def _reload(opened) -> None:
    browser = opened["browser"]
    browser.events[:] = [e for e in browser.events if e.get("method") != "Page.loadEventFired"]  # wait for the new one
    browser.send("Page.reload", session=opened["session"])
    browser.wait_for("Page.loadEventFired", opened["session"], timeout=20)


def _visible_rect(opened, selector: str) -> dict:
    return _evaluate(opened, f"""(() => {{ window.scrollTo(0, 0); const e = document.querySelector({json.dumps(selector)});
        const r = e.getBoundingClientRect(); return {{top: r.top, bottom: r.bottom, left: r.left, right: r.right,
        width: r.width, height: r.height, viewport: window.innerHeight}}; }})()""")


def test_first_screen_shows_the_counts_and_the_first_neighbourhood(opened):
    # desktop width: without scrolling, the four counts and the first flagged point's map are in view
    _reload(opened)  # as first opened (the test above sorted and filtered)
    for selector in (".cards", "#flagged .hood-card svg.hood", "#flagged .hood-card > h3"):
        rect = _visible_rect(opened, selector)
        assert rect["height"] > 0 and rect["top"] >= 0 and rect["bottom"] <= rect["viewport"], (selector, rect)
    why = _visible_rect(opened, "#flagged .hood-card .facts .why")  # the reasons begin on the first screen too
    assert why["top"] < why["viewport"] - 60, why
    first_card = _evaluate(opened, 'Number(document.querySelector("#flagged .hood-card").dataset.row)')
    first_row = _evaluate(opened, 'Number(document.querySelector("#flagged-table tbody tr").dataset.row)')
    assert first_card == first_row  # the strongest flag first in both
    labels = _evaluate(opened, """Array.from(document.querySelector("#flagged .hood-card svg.hood")
        .querySelectorAll("text")).map(t => t.textContent)""")
    neighbours = _evaluate(opened, """document.querySelector("#flagged .hood-card").querySelectorAll("details li").length""")
    assert neighbours >= 4 and len(labels) >= neighbours  # a value label per neighbour, the ring and the point


def test_phone_width_has_no_sideways_scroll_and_shows_the_reasons(opened):
    browser, session = opened["browser"], opened["session"]
    browser.send("Emulation.setDeviceMetricsOverride",
                 {"width": 390, "height": 844, "deviceScaleFactor": 2, "mobile": True}, session=session)
    try:
        _reload(opened)
        width = _evaluate(opened, "document.documentElement.scrollWidth")
        inner = _evaluate(opened, "window.innerWidth")
        assert inner == 390 and width <= inner, (width, inner)
        # open every collapsed section: still no sideways scroll
        _evaluate(opened, 'document.querySelectorAll("details").forEach(d => d.open = true); 0')
        assert _evaluate(opened, "document.documentElement.scrollWidth") <= inner
        # the reasons of the first point to check sit inside the screen, wide enough to read
        reasons = _visible_rect(opened, "#flagged-table tbody tr td.reasons")
        assert reasons["left"] >= 0 and reasons["right"] <= inner and reasons["width"] >= 300, reasons
        # figures fill the width (their 9-10 point text then stays about 9 CSS pixels high)
        widths = _evaluate(opened, """Array.from(document.querySelectorAll("figure img"))
            .map(i => [i.getBoundingClientRect().width, i.naturalWidth])""")
        assert widths and all(w <= inner and w >= 0.85 * min(inner - 20, n / 2) for w, n in widths), widths
        shot = browser.send("Page.captureScreenshot", {"format": "png"}, session=session)
        (opened["folder"] / "report_phone.png").write_bytes(base64.b64decode(shot["data"]))
    finally:
        browser.send("Emulation.setDeviceMetricsOverride",
                     {"width": VIEWPORT[0], "height": VIEWPORT[1], "deviceScaleFactor": 1, "mobile": False}, session=session)


def test_campaign_report_at_phone_width_has_no_sideways_scroll(tmp_path):
    # the campaign report is drawn on the same page as the screen report: the same 390 px rule holds
    from conftest import invented_programme

    from pointsift.campaigns import CampaignConfig, screen_campaigns
    from pointsift.report.campaigns import write_campaign_report

    frame = invented_programme(60, 8, seed=5, missing=0.0)
    frame.loc[300, "level_m"] += 9.0
    result = screen_campaigns(frame, CampaignConfig(screen=ScreenConfig(value="level_m", id="well_id",
                                                                        permutations=99), date="date"))
    report = write_campaign_report(result, tmp_path / "campaigns.html")
    browser = DevTools(tmp_path / "profile")
    try:
        target = browser.send("Target.createTarget", {"url": "about:blank"})["targetId"]
        session = browser.send("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        for domain in ("Runtime", "Page"):
            browser.send(f"{domain}.enable", session=session)
        browser.send("Emulation.setDeviceMetricsOverride",
                     {"width": 390, "height": 844, "deviceScaleFactor": 2, "mobile": True}, session=session)
        browser.send("Page.navigate", {"url": report.as_uri()}, session=session)
        browser.wait_for("Page.loadEventFired", session, timeout=20)
        page = {"browser": browser, "session": session}
        _evaluate(page, 'document.querySelectorAll("details").forEach(d => d.open = true); 0')
        inner = _evaluate(page, "window.innerWidth")
        assert inner == 390 and _evaluate(page, "document.documentElement.scrollWidth") <= inner
        widths = _evaluate(page, """Array.from(document.querySelectorAll("figure img"))
            .map(i => i.getBoundingClientRect().right)""")
        assert len(widths) >= 3 and all(right <= inner for right in widths), widths  # campaign and screen figures
        assert _evaluate(page, 'document.querySelectorAll("#counts .card").length') == 4
    finally:
        browser.close()
