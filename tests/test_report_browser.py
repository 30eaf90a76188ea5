"""The demo report in a real headless browser: loads cleanly, plots visible, verdicts on screen.

Chromium is driven over its DevTools protocol with a minimal WebSocket
client written here (standard library only), so the test sees console
messages, page errors, every network request and the laid-out positions of
the plots, and takes screenshots to check the plots are not blank.
"""

from __future__ import annotations

import base64
import io
import json
import os
import re
import shutil
import socket
import struct
import subprocess
import time
import urllib.request
from pathlib import Path

import numpy as np
import pytest

BROWSER = shutil.which("chromium") or shutil.which("chromium-browser")
pytestmark = pytest.mark.skipif(BROWSER is None, reason="chromium is not installed")

FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--remote-debugging-port=0", "--remote-allow-origins=*"]
VIEWPORT = (1280, 900)


class WebSocket:
    """Just enough RFC 6455 for a DevTools session: masked text frames out, frames in."""

    def __init__(self, url: str, timeout_s: float = 30.0):
        m = re.match(r"ws://([^:/]+):(\d+)(/.*)", url)
        self.sock = socket.create_connection((m.group(1), int(m.group(2))), timeout=timeout_s)
        key = base64.b64encode(os.urandom(16)).decode()
        self.sock.sendall((f"GET {m.group(3)} HTTP/1.1\r\nHost: {m.group(1)}:{m.group(2)}\r\n"
                           f"Upgrade: websocket\r\nConnection: Upgrade\r\nSec-WebSocket-Key: {key}\r\n"
                           "Sec-WebSocket-Version: 13\r\n\r\n").encode())
        head = b""
        while b"\r\n\r\n" not in head:
            head += self.sock.recv(1)
        assert b" 101 " in head.split(b"\r\n")[0], head

    def _read(self, n: int) -> bytes:
        data = b""
        while len(data) < n:
            chunk = self.sock.recv(n - len(data))
            if not chunk:
                raise ConnectionError("DevTools connection closed")
            data += chunk
        return data

    def send(self, text: str) -> None:
        payload = text.encode()
        n = len(payload)
        header = bytes([0x81]) + (bytes([0x80 | n]) if n < 126 else
                                  bytes([0x80 | 126]) + struct.pack(">H", n) if n < 65536 else
                                  bytes([0x80 | 127]) + struct.pack(">Q", n))
        mask = os.urandom(4)
        body = bytes(b ^ mask[i % 4] for i, b in enumerate(payload))
        self.sock.sendall(header + mask + body)

    def recv(self) -> str:
        message = b""
        while True:
            b0, b1 = self._read(2)
            n = b1 & 0x7F
            if n == 126:
                n = struct.unpack(">H", self._read(2))[0]
            elif n == 127:
                n = struct.unpack(">Q", self._read(8))[0]
            payload = self._read(n)
            opcode = b0 & 0x0F
            if opcode == 0x8:
                raise ConnectionError("DevTools connection closed")
            if opcode in (0x9, 0xA):
                continue  # ping/pong: the browser does not require an answer in a short session
            message += payload
            if b0 & 0x80:
                return message.decode()

    def close(self) -> None:
        self.sock.close()


class DevTools:
    """Commands and the events that arrive in between."""

    def __init__(self, ws: WebSocket):
        self.ws = ws
        self.next_id = 0
        self.events: list[dict] = []

    def call(self, method: str, **params):
        self.next_id += 1
        self.ws.send(json.dumps({"id": self.next_id, "method": method, "params": params}))
        while True:
            msg = json.loads(self.ws.recv())
            if msg.get("id") == self.next_id:
                if "error" in msg:
                    raise RuntimeError(f"{method}: {msg['error']}")
                return msg.get("result", {})
            if "method" in msg:
                self.events.append(msg)

    def wait_for(self, method: str, timeout_s: float = 30.0) -> dict:
        deadline = time.monotonic() + timeout_s
        for event in self.events:
            if event["method"] == method:
                return event
        while time.monotonic() < deadline:
            msg = json.loads(self.ws.recv())
            if "method" in msg:
                self.events.append(msg)
                if msg["method"] == method:
                    return msg
        raise TimeoutError(method)

    def evaluate(self, expression: str):
        result = self.call("Runtime.evaluate", expression=expression, returnByValue=True)
        return result["result"].get("value")


@pytest.fixture(scope="module")
def demo_report(tmp_path_factory) -> Path:
    from typer.testing import CliRunner

    from rfmeas.cli import app

    out = tmp_path_factory.mktemp("demo")
    result = CliRunner().invoke(app, ["demo", "--out", str(out)])
    assert result.exit_code == 0, result.output
    reports = sorted(out.glob("*.html"))
    assert reports and str(reports[0]) in result.stdout.replace("\n", "")
    return reports[0]


@pytest.fixture(scope="module")
def page(demo_report, tmp_path_factory):
    """Load the report in headless Chromium; yields (DevTools session, layout facts)."""
    profile = tmp_path_factory.mktemp("chromium-profile")
    proc = subprocess.Popen([BROWSER, *FLAGS, f"--user-data-dir={profile}", "about:blank"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    try:
        port = None
        deadline = time.monotonic() + 60
        while port is None and time.monotonic() < deadline:
            line = proc.stderr.readline()
            if not line and proc.poll() is not None:
                break
            m = re.search(r"DevTools listening on ws://[^:]+:(\d+)/", line)
            port = int(m.group(1)) if m else None
        assert port, "chromium did not open its DevTools port"
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/json/list", timeout=10) as r:
            targets = json.load(r)
        target = next(t for t in targets if t["type"] == "page")
        ws = WebSocket(target["webSocketDebuggerUrl"])
        tools = DevTools(ws)
        for domain in ("Page", "Runtime", "Log", "Network"):
            tools.call(f"{domain}.enable")
        tools.call("Emulation.setDeviceMetricsOverride", width=VIEWPORT[0], height=VIEWPORT[1],
                   deviceScaleFactor=1, mobile=False)
        tools.events.clear()
        tools.call("Page.navigate", url=demo_report.resolve().as_uri())
        tools.wait_for("Page.loadEventFired")
        yield tools
        ws.close()
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()


def screenshot(tools: DevTools, clip: dict | None = None) -> np.ndarray:
    from PIL import Image

    params = {"format": "png"}
    if clip is not None:
        params.update(clip=dict(clip, scale=1), captureBeyondViewport=True)
    data = base64.b64decode(tools.call("Page.captureScreenshot", **params)["data"])
    return np.asarray(Image.open(io.BytesIO(data)).convert("L"), dtype=float)


def test_page_loads_without_console_errors_or_network_fetches(page):
    errors = [e for e in page.events
              if e["method"] == "Runtime.exceptionThrown"
              or (e["method"] == "Runtime.consoleAPICalled" and e["params"]["type"] in ("error", "assert"))
              or (e["method"] == "Log.entryAdded" and e["params"]["entry"]["level"] == "error")]
    assert errors == []
    urls = [e["params"]["request"]["url"] for e in page.events if e["method"] == "Network.requestWillBeSent"]
    assert urls, "the page itself should appear as a request"
    assert all(u.startswith(("file:", "data:")) for u in urls), urls
    assert page.evaluate("document.scripts.length") == 0
    assert page.evaluate("document.querySelectorAll('link[rel=stylesheet], iframe, object').length") == 0


def test_verdict_table_is_on_screen_at_the_top(page):
    box = page.evaluate("""(() => { const t = document.getElementById('verdicts');
        const r = t.getBoundingClientRect();
        return {top: r.top, bottom: r.bottom, left: r.left, right: r.right, text: t.innerText,
                visible: getComputedStyle(t).visibility === 'visible' && r.width > 0 && r.height > 0}; })()""")
    assert box["visible"]
    assert 0 <= box["top"] and box["bottom"] <= VIEWPORT[1], box  # in the first screenful, no scrolling
    assert "fit converged" in box["text"] and "design check" in box["text"].lower()
    image = screenshot(page)  # the viewport as first shown
    region = image[int(box["top"]):int(box["bottom"]), int(box["left"]):int(box["right"])]
    assert (region < 128).mean() > 0.01  # dark text drawn inside the table's area


def test_plots_are_present_loaded_and_not_blank(page):
    plots = page.evaluate("""Array.from(document.querySelectorAll('img.plot')).map(img => {
        const r = img.getBoundingClientRect();
        return {alt: img.alt, complete: img.complete, natural: img.naturalWidth,
                x: r.left + scrollX, y: r.top + scrollY, w: r.width, h: r.height,
                src: img.getAttribute('src').slice(0, 22)}; })""")
    titles = {p["alt"] for p in plots}
    assert "Smith chart of the reflection sweeps" in titles and "Gain and return loss" in titles
    assert len(plots) >= 4 + 2  # one per sweep plus the response and the Smith chart
    height = page.evaluate("document.documentElement.scrollHeight")
    whole = screenshot(page, {"x": 0, "y": 0, "width": VIEWPORT[0], "height": height})  # the full page
    for p in plots:
        assert p["complete"] and p["natural"] > 0, p
        assert p["src"] == "data:image/png;base64,"
        assert p["w"] > 300 and p["h"] > 200, p
        region = whole[int(p["y"]):int(p["y"] + p["h"]), int(p["x"]):int(p["x"] + p["w"])]
        assert region.shape[0] > 200, p
        # a plot has ink (axes, text, lines): a good share of clearly non-white pixels and contrast
        assert (region < 200).mean() > 0.02, p["alt"]
        assert region.std() > 20, p["alt"]


def test_report_sections_in_order_and_version_shown(page):
    text = page.evaluate("document.body.innerText")
    positions = [text.find(word) for word in ("Verdicts", "Equivalent circuit", "Figures of merit",
                                              "Warnings", "Plots", "Measurements", "Software", "Cautions")]
    assert -1 not in positions and positions == sorted(positions), positions
    from rfmeas import __version__

    assert f"rfmeas {__version__}" in text


LAYOUT_FACTS = """(() => {
    scrollTo(0, 0);
    const table = document.getElementById('verdicts');
    const box = table.getBoundingClientRect();
    const lines = cell => {  // how many lines a cell's text takes: distinct tops of its line boxes
        const range = document.createRange();
        range.selectNodeContents(cell);
        return new Set(Array.from(range.getClientRects()).map(r => Math.round(r.top))).size;
    };
    const short = Array.from(table.querySelectorAll('td.state, td.num'))
        .map(c => ({text: c.innerText, lines: lines(c)}));
    return {scrollWidth: document.documentElement.scrollWidth, innerWidth: innerWidth,
            innerHeight: innerHeight, top: box.top, bottom: box.bottom, left: box.left, right: box.right,
            short: short};
})()"""


@pytest.mark.parametrize("width", [1280, 800])
def test_layout_at_common_window_widths(page, width):
    """Screenshots at 1280 and 800 px: no sideways scroll, verdicts on the first screen, short cells unwrapped."""
    try:
        page.call("Emulation.setDeviceMetricsOverride", width=width, height=VIEWPORT[1],
                  deviceScaleFactor=1, mobile=False)
        facts = page.evaluate(LAYOUT_FACTS)
        image = screenshot(page)
        assert image.shape[1] == width
        assert facts["scrollWidth"] <= facts["innerWidth"], facts  # no horizontal scroll bar
        assert 0 <= facts["top"] and facts["bottom"] <= facts["innerHeight"], facts  # verdicts on screen one
        region = image[int(facts["top"]):int(facts["bottom"]), int(facts["left"]):int(facts["right"])]
        assert (region < 128).mean() > 0.01  # and drawn there
        if width >= 1280:
            wrapped = [c for c in facts["short"] if c["text"].strip() and c["lines"] != 1]
            assert facts["short"] and wrapped == [], wrapped
    finally:
        page.call("Emulation.setDeviceMetricsOverride", width=VIEWPORT[0], height=VIEWPORT[1],
                  deviceScaleFactor=1, mobile=False)


def test_pdf_is_a4_and_keeps_the_cautions_whole(demo_report, tmp_path):
    """The printed report: A4 pages (595 × 842 pt, ISO 216), the caution box not split across pages."""
    from rfmeas.present.report.pdf import print_pdf

    pdf = print_pdf(demo_report, tmp_path / "report.pdf").read_bytes()
    boxes = re.findall(rb"/MediaBox\s*\[\s*0\s+0\s+([\d.]+)\s+([\d.]+)\s*\]", pdf)
    assert boxes
    for w, h in boxes:
        assert abs(float(w) - 595.3) < 2 and abs(float(h) - 841.9) < 2, (w, h)
    html = demo_report.read_text(encoding="utf-8")
    assert "@page { size: A4" in html
    cautions_css = re.search(r"\.cautions \{[^}]*\}", html).group(0)
    assert "break-inside: avoid" in cautions_css
