"""The report in a real browser: Debian's headless Chromium, driven over the DevTools protocol.

Standard library only: ``http.client`` would do for the HTTP side; the
WebSocket side (RFC 6455) is a minimal client below, enough for DevTools
JSON messages (text frames, masking, 16/64-bit lengths, fragmentation, ping).
"""

import base64
import json
import os
import shutil
import socket
import struct
import subprocess
import time
from pathlib import Path
from urllib.parse import unquote, urlparse

import numpy as np
import pytest

from zoneprofile.chronology import population_summary
from zoneprofile.report import write_outputs
from zoneprofile.report._sample import sample_provenance, sample_records

pytestmark = [pytest.mark.browser, pytest.mark.slow]


def _chromium():
    for name in ("chromium", "chromium-browser"):
        path = shutil.which(name)
        if path:
            return path
    return "/usr/bin/chromium" if os.path.exists("/usr/bin/chromium") else None


class _WebSocket:
    """Just enough RFC 6455 for the DevTools protocol."""

    def __init__(self, url, timeout=20.0):
        u = urlparse(url)
        self.sock = socket.create_connection((u.hostname, u.port), timeout=timeout)
        key = base64.b64encode(os.urandom(16)).decode()
        request = (f"GET {u.path} HTTP/1.1\r\nHost: {u.hostname}:{u.port}\r\nUpgrade: websocket\r\n"
                   f"Connection: Upgrade\r\nSec-WebSocket-Key: {key}\r\nSec-WebSocket-Version: 13\r\n\r\n")
        self.sock.sendall(request.encode())
        head = b""
        while b"\r\n\r\n" not in head:
            chunk = self.sock.recv(1)
            if not chunk:
                raise ConnectionError("DevTools closed the connection during the handshake")
            head += chunk
        assert b" 101 " in head.split(b"\r\n", 1)[0], head

    def _recv_exact(self, n):
        buf = b""
        while len(buf) < n:
            chunk = self.sock.recv(n - len(buf))
            if not chunk:
                raise ConnectionError("DevTools connection closed")
            buf += chunk
        return buf

    def send(self, text):
        payload = text.encode()
        header = bytes([0x81])
        n = len(payload)
        if n < 126:
            header += bytes([0x80 | n])
        elif n < 65536:
            header += bytes([0x80 | 126]) + struct.pack(">H", n)
        else:
            header += bytes([0x80 | 127]) + struct.pack(">Q", n)
        mask = os.urandom(4)
        masked = bytes(b ^ mask[i % 4] for i, b in enumerate(payload))
        self.sock.sendall(header + mask + masked)

    def recv(self):
        message = b""
        while True:
            b0, b1 = self._recv_exact(2)
            opcode, fin = b0 & 0x0F, b0 & 0x80
            n = b1 & 0x7F
            if n == 126:
                n = struct.unpack(">H", self._recv_exact(2))[0]
            elif n == 127:
                n = struct.unpack(">Q", self._recv_exact(8))[0]
            data = self._recv_exact(n)
            if opcode == 0x9:  # ping -> pong
                self.sock.sendall(bytes([0x8A, 0x80 | len(data)]) + b"\0\0\0\0" + data)
                continue
            if opcode == 0x8:
                raise ConnectionError("DevTools closed the websocket")
            message += data
            if fin:
                return message.decode()

    def close(self):
        self.sock.close()


class _DevTools:
    def __init__(self, ws_url):
        self.ws = _WebSocket(ws_url)
        self.next_id = 0
        self.events = []

    def call(self, method, params=None, timeout=30.0):
        self.next_id += 1
        mid = self.next_id
        self.ws.send(json.dumps({"id": mid, "method": method, "params": params or {}}))
        end = time.monotonic() + timeout
        while time.monotonic() < end:
            msg = json.loads(self.ws.recv())
            if msg.get("id") == mid:
                if "error" in msg:
                    raise RuntimeError(f"{method}: {msg['error']}")
                return msg.get("result", {})
            if "method" in msg:
                self.events.append(msg)
        raise TimeoutError(method)


def _page_websocket(port, timeout=20.0):
    import http.client

    end = time.monotonic() + timeout
    while time.monotonic() < end:
        try:
            conn = http.client.HTTPConnection("127.0.0.1", port, timeout=5)
            conn.request("GET", "/json/list")
            targets = json.loads(conn.getresponse().read())
            conn.close()
            pages = [t for t in targets if t.get("type") == "page"]
            if pages:
                return pages[0]["webSocketDebuggerUrl"]
        except (OSError, ValueError):
            pass
        time.sleep(0.1)
    raise TimeoutError("no page target from Chromium")


_PAGE_STATE = (
    "JSON.stringify({n: document.images.length, "
    "drawn: Array.from(document.images).filter(i => i.complete && i.naturalWidth > 0).length, "
    "scripts: document.scripts.length, title: document.title, "
    "caution: document.body.innerText.includes('do not replace')})"
)


# the report at a 1400 px window: the paper figures decoded, the workbook link, and tables that fit
_LAYOUT = (
    "JSON.stringify({"
    "figures: ['Event ladders of all crystals', 'Dated profiles, small multiples'].map(alt => "
    "Array.from(document.images).filter(i => i.alt === alt).map(i => i.complete ? i.naturalWidth : 0)), "
    "svgs: document.querySelectorAll('svg').length, "
    "workbook: Array.from(document.querySelectorAll('a')).filter(a => a.getAttribute('href') && "
    "a.getAttribute('href').endsWith('supplement.xlsx')).map(a => a.href), "
    "viewport: window.innerWidth, page: document.documentElement.scrollWidth, "
    "tables: document.querySelectorAll('table').length, "
    "wide: Array.from(document.querySelectorAll('table')).filter(t => "
    "t.scrollWidth > t.parentElement.clientWidth).map(t => [t.scrollWidth, t.parentElement.clientWidth, "
    "(t.tHead ? t.tHead.innerText : '').slice(0, 80)])})"
)


def _layout(cdp):
    """The layout checks of :data:`_LAYOUT` on the page loaded last."""
    result = cdp.call("Runtime.evaluate", {"expression": _LAYOUT, "returnByValue": True})
    return json.loads(result["result"]["value"])


def _inspect(cdp, url):
    """Load ``url``, wait for the load event, return (page state, events seen meanwhile)."""
    start = len(cdp.events)
    cdp.call("Page.navigate", {"url": url})
    end = time.monotonic() + 30
    while not any(e["method"] == "Page.loadEventFired" for e in cdp.events[start:]):
        if time.monotonic() > end:
            raise TimeoutError("Page.loadEventFired")
        msg = json.loads(cdp.ws.recv())
        if "method" in msg:
            cdp.events.append(msg)
    result = cdp.call("Runtime.evaluate", {"expression": _PAGE_STATE, "returnByValue": True})
    time.sleep(0.2)
    cdp.call("Runtime.evaluate", {"expression": "1"})  # collect late events
    return json.loads(result["result"]["value"]), cdp.events[start:]


def _errors(events):
    """Console errors, uncaught exceptions and failed loads among DevTools events."""
    errors = [e for e in events if e["method"] == "Runtime.exceptionThrown"]
    errors += [e for e in events if e["method"] == "Log.entryAdded" and e["params"]["entry"]["level"] == "error"]
    errors += [e for e in events if e["method"] == "Runtime.consoleAPICalled"
               and e["params"]["type"] in ("error", "assert")]
    errors += [e for e in events if e["method"] == "Network.loadingFailed"]
    return errors


@pytest.fixture
def report_path(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    # a long unbroken sample name and long input paths: table cells must wrap them, not widen the page
    long_name = "EF-3_lower_flow_unit_scoria_clast_collected_2026"
    recs = sample_records(seed=5, crystals_per_sample=1, n_draws=200,
                          samples=("North vent", "<i>South</i> & flank", long_name))
    for r in recs:
        for i in r["inputs"]:
            i["path"] = f"/home/someone/projects/campaigns/2026/microprobe/session_03/{r['sample']}/{i['path']}"
    pop = population_summary(recs, n_bootstrap=30)
    write_outputs(recs, pop, sample_provenance(recs), out, formats=("png",))
    return out / "report.html"


def test_report_renders_in_headless_chromium(report_path, tmp_path):
    exe = _chromium()
    if exe is None:
        pytest.skip("Chromium not found (apt-get install chromium; .ci/run installs it)")
    profile = tmp_path / "chromium-profile"
    profile.mkdir()
    proc = subprocess.Popen(
        [exe, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         f"--user-data-dir={profile}", "--remote-debugging-port=0", "--remote-debugging-address=127.0.0.1",
         "--window-size=1400,2000", "about:blank"],
        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
    )
    try:
        port_file = profile / "DevToolsActivePort"
        end = time.monotonic() + 30
        while not (port_file.exists() and port_file.read_text().strip()) and time.monotonic() < end:
            if proc.poll() is not None:
                pytest.fail(f"Chromium exited with code {proc.returncode} before opening DevTools")
            time.sleep(0.1)
        port = int(port_file.read_text().split()[0])
        cdp = _DevTools(_page_websocket(port))
        try:
            for domain in ("Page", "Runtime", "Log", "Network"):
                cdp.call(f"{domain}.enable")
            cdp.call("Emulation.setDeviceMetricsOverride",
                     {"width": 1400, "height": 2000, "deviceScaleFactor": 1, "mobile": False})
            page, events = _inspect(cdp, report_path.as_uri())
            layout = _layout(cdp)
            shot = cdp.call("Page.captureScreenshot", {"format": "png", "captureBeyondViewport": False})
            # negative control: the same checks catch a broken picture and a missing file
            broken = tmp_path / "broken.html"
            broken.write_text('<!DOCTYPE html><html><body><img src="data:image/png;base64,iVBORw0KGgoAAAA">'
                              '<img src="missing.png"></body></html>')
            bad_page, bad_events = _inspect(cdp, broken.as_uri())
            # negative control of the width check: a table wider than its container is caught
            wide = tmp_path / "wide.html"
            wide.write_text('<!DOCTYPE html><html><body><main style="max-width:1100px"><table><tr>'
                            + "<td>a_rather_long_unbreakable_cell_value_here</td>" * 40 + "</tr></table></main>"
                            "</body></html>")
            _inspect(cdp, wide.as_uri())
            bad_layout = _layout(cdp)
        finally:
            cdp.ws.close()
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()

    assert bad_page["n"] == 2 and bad_page["drawn"] == 0
    assert _errors(bad_events)

    assert len(bad_layout["wide"]) == 1 and bad_layout["page"] > 1400

    # at a 1400 px window: the population's paper figures decoded (naturalWidth > 0) ...
    assert layout["viewport"] == 1400, layout
    assert all(len(widths) == 1 and widths[0] > 0 for widths in layout["figures"]), layout["figures"]
    # ... the workbook linked, and the link resolves to the file written beside the report
    assert len(layout["workbook"]) >= 1
    for href in layout["workbook"]:
        target = Path(unquote(urlparse(href).path))
        assert href.startswith("file:") and target == report_path.parent / "supplement.xlsx" and target.is_file()
    # ... and no table wider than its container, nor the page wider than the window
    assert layout["tables"] > 5
    assert layout["wide"] == [], layout["wide"]
    assert layout["page"] <= 1400, layout["page"]

    # figures drawn: every <img> decoded with a non-zero natural size
    assert page["n"] >= 4, page
    assert page["drawn"] == page["n"], page
    assert page["scripts"] == 0 and page["caution"]
    # no console errors, no uncaught exceptions, no failed loads
    assert _errors(events) == []
    # nothing but the file itself and data: URIs was requested
    urls = [e["params"]["request"]["url"] for e in events if e["method"] == "Network.requestWillBeSent"]
    assert urls and all(u.startswith(("file:", "data:")) for u in urls), urls

    # the screenshot is kept beside the test and is not blank
    png = base64.b64decode(shot["data"])
    shot_path = tmp_path / "report-screenshot.png"
    shot_path.write_bytes(png)
    assert png[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG specification)
    from PIL import Image

    with Image.open(shot_path) as im:
        pixels = np.asarray(im.convert("L"), dtype=float)
    assert pixels.shape[0] > 100 and pixels.shape[1] > 100
    assert pixels.std() > 10  # text and figures, not a blank page
    assert (pixels < 128).mean() > 0.005  # some dark ink
