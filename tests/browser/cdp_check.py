#!/usr/bin/env python3
"""Open a lightfold report.html in headless Chromium and check it, using only the Python
standard library: the Chrome DevTools Protocol over a minimal WebSocket client (RFC 6455).

Checks:
  * the page loads (load event) with no console errors, no uncaught exceptions and no
    error log entries;
  * it asks for nothing over the network (every request must be the file itself or data:);
  * every <figure data-plot> holds an <svg> with a non-zero size and at least one <path>
    with drawing data.
Keeps a full-page screenshot PNG at the path given.

Usage: cdp_check.py --chromium /usr/bin/chromium --html report.html --screenshot shot.png
Exit code 0 when all checks pass, 1 when a check fails, 2 when the browser cannot be run.
"""

import argparse
import base64
import json
import os
import pathlib
import shutil
import socket
import struct
import subprocess
import sys
import tempfile
import time

FLAGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]

FIGURE_CHECK_JS = r"""
(() => {
  const out = [];
  for (const fig of document.querySelectorAll('figure[data-plot]')) {
    const svg = fig.querySelector('svg');
    const paths = svg ? Array.from(svg.querySelectorAll('path')) : [];
    const drawn = paths.filter(p => (p.getAttribute('d') || '').length > 10).length;
    const box = svg ? svg.getBoundingClientRect() : {width: 0, height: 0};
    out.push({name: fig.dataset.plot, hasSvg: !!svg, paths: paths.length, drawn,
              width: box.width, height: box.height});
  }
  return JSON.stringify({figures: out, title: document.title,
                         height: document.documentElement.scrollHeight,
                         width: document.documentElement.scrollWidth});
})()
"""


class WebSocket:
    """Just enough of RFC 6455 for the DevTools protocol: text frames, client masking."""

    def __init__(self, url, timeout):
        assert url.startswith("ws://"), url
        hostport, _, path = url[len("ws://"):].partition("/")
        host, _, port = hostport.partition(":")
        self.sock = socket.create_connection((host, int(port)), timeout=timeout)
        key = base64.b64encode(os.urandom(16)).decode()
        request = (
            f"GET /{path} HTTP/1.1\r\nHost: {hostport}\r\nUpgrade: websocket\r\n"
            f"Connection: Upgrade\r\nSec-WebSocket-Key: {key}\r\n"
            "Sec-WebSocket-Version: 13\r\n\r\n"
        )
        self.sock.sendall(request.encode())
        response = b""
        while b"\r\n\r\n" not in response:
            chunk = self.sock.recv(4096)
            if not chunk:
                raise ConnectionError("WebSocket handshake: connection closed")
            response += chunk
        head, _, self.buffer = response.partition(b"\r\n\r\n")
        if b" 101 " not in head.split(b"\r\n")[0]:
            raise ConnectionError(f"WebSocket handshake refused: {head[:200]!r}")

    def send(self, text):
        payload = text.encode()
        header = bytearray([0x81])  # FIN + text
        n = len(payload)
        if n < 126:
            header.append(0x80 | n)
        elif n < 1 << 16:
            header.append(0x80 | 126)
            header += struct.pack(">H", n)
        else:
            header.append(0x80 | 127)
            header += struct.pack(">Q", n)
        mask = os.urandom(4)
        header += mask
        masked = bytes(b ^ mask[i % 4] for i, b in enumerate(payload))
        self.sock.sendall(bytes(header) + masked)

    def _read(self, n):
        while len(self.buffer) < n:
            chunk = self.sock.recv(1 << 20)
            if not chunk:
                raise ConnectionError("WebSocket closed by the browser")
            self.buffer += chunk
        data, self.buffer = self.buffer[:n], self.buffer[n:]
        return data

    def recv(self):
        message = b""
        while True:
            b0, b1 = self._read(2)
            opcode, n = b0 & 0x0F, b1 & 0x7F
            if n == 126:
                n = struct.unpack(">H", self._read(2))[0]
            elif n == 127:
                n = struct.unpack(">Q", self._read(8))[0]
            if b1 & 0x80:
                mask = self._read(4)
                data = bytes(b ^ mask[i % 4] for i, b in enumerate(self._read(n)))
            else:
                data = self._read(n)
            if opcode == 0x8:
                raise ConnectionError("WebSocket closed by the browser")
            if opcode in (0x9, 0xA):  # ping / pong: ignore
                continue
            message += data
            if b0 & 0x80:
                return message.decode()


class DevTools:
    """Commands and events of one page session (flattened target sessions)."""

    def __init__(self, ws):
        self.ws = ws
        self.next_id = 0
        self.events = []
        self.session = None

    def call(self, method, params=None, session=True, timeout=30.0):
        self.next_id += 1
        msg = {"id": self.next_id, "method": method, "params": params or {}}
        if session and self.session:
            msg["sessionId"] = self.session
        self.ws.send(json.dumps(msg))
        deadline = time.time() + timeout
        while time.time() < deadline:
            reply = json.loads(self.ws.recv())
            if reply.get("id") == self.next_id:
                if "error" in reply:
                    raise RuntimeError(f"{method}: {reply['error']}")
                return reply.get("result", {})
            if "method" in reply:
                self.events.append(reply)
        raise TimeoutError(f"{method}: no answer in {timeout} s")

    def wait_for(self, method, timeout=30.0):
        for e in self.events:
            if e["method"] == method:
                return e
        deadline = time.time() + timeout
        while time.time() < deadline:
            msg = json.loads(self.ws.recv())
            if "method" in msg:
                self.events.append(msg)
                if msg["method"] == method:
                    return msg
        raise TimeoutError(f"no {method} in {timeout} s")


def start_browser(chromium, profile):
    args = [chromium, *FLAGS, f"--user-data-dir={profile}", "--remote-debugging-port=0",
            "about:blank"]
    proc = subprocess.Popen(args, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    port_file = pathlib.Path(profile) / "DevToolsActivePort"
    deadline = time.time() + 30
    while time.time() < deadline:
        if port_file.exists():
            lines = port_file.read_text().split("\n")
            if len(lines) >= 2 and lines[1]:
                return proc, f"ws://127.0.0.1:{lines[0].strip()}{lines[1].strip()}"
        if proc.poll() is not None:
            err = proc.stderr.read().decode(errors="replace")[-2000:]
            raise RuntimeError(f"chromium exited with code {proc.returncode}:\n{err}")
        time.sleep(0.1)
    proc.kill()
    raise RuntimeError("chromium did not open its DevTools port within 30 s")


def check(chromium, html, screenshot, width):
    html = pathlib.Path(html).resolve()
    url = html.as_uri()
    profile = tempfile.mkdtemp(prefix="lightfold-chromium-")
    proc = None
    problems = []
    try:
        proc, ws_url = start_browser(chromium, profile)
        dt = DevTools(WebSocket(ws_url, timeout=60))
        target = dt.call("Target.createTarget", {"url": "about:blank"}, session=False)
        attached = dt.call("Target.attachToTarget",
                           {"targetId": target["targetId"], "flatten": True}, session=False)
        dt.session = attached["sessionId"]
        for domain in ("Page", "Runtime", "Log", "Network"):
            dt.call(f"{domain}.enable")
        dt.call("Emulation.setDeviceMetricsOverride",
                {"width": width, "height": 900, "deviceScaleFactor": 1, "mobile": False})
        dt.events.clear()
        dt.call("Page.navigate", {"url": url})
        dt.wait_for("Page.loadEventFired", timeout=60)
        time.sleep(0.5)  # let late console messages arrive
        dt.call("Runtime.evaluate", {"expression": "1"})  # flushes pending events

        for e in dt.events:
            m, p = e["method"], e.get("params", {})
            if m == "Runtime.consoleAPICalled" and p.get("type") in ("error", "assert"):
                args = " ".join(str(a.get("value", a.get("description", ""))) for a in p["args"])
                problems.append(f"console {p['type']}: {args}")
            elif m == "Runtime.exceptionThrown":
                problems.append(f"uncaught exception: {p['exceptionDetails'].get('text')}")
            elif m == "Log.entryAdded" and p["entry"].get("level") == "error":
                problems.append(f"log error: {p['entry'].get('text')} {p['entry'].get('url', '')}")
            elif m == "Network.requestWillBeSent":
                req = p["request"]["url"]
                if req != url and not req.startswith("data:"):
                    problems.append(f"network request: {req}")

        result = dt.call("Runtime.evaluate",
                         {"expression": FIGURE_CHECK_JS, "returnByValue": True})
        info = json.loads(result["result"]["value"])
        figures = info["figures"]
        if not figures:
            problems.append("no <figure data-plot> on the page")
        for f in figures:
            if not f["hasSvg"]:
                problems.append(f"figure {f['name']!r}: no <svg>")
            elif f["drawn"] == 0 or f["width"] < 10 or f["height"] < 10:
                problems.append(f"figure {f['name']!r}: nothing drawn "
                                f"({f['drawn']} paths, {f['width']}x{f['height']} px)")

        # Full-page screenshot.
        height = min(int(info["height"]), 16000)
        dt.call("Emulation.setDeviceMetricsOverride",
                {"width": width, "height": height, "deviceScaleFactor": 1, "mobile": False})
        shot = dt.call("Page.captureScreenshot",
                       {"format": "png", "captureBeyondViewport": True}, timeout=60)
        pathlib.Path(screenshot).write_bytes(base64.b64decode(shot["data"]))

        print(f"page: {info['title']!r}, {width}x{height} px")
        for f in figures:
            print(f"  figure {f['name']!r}: {f['drawn']} drawn paths, "
                  f"{f['width']:.0f}x{f['height']:.0f} px")
        print(f"screenshot: {screenshot}")
    finally:
        if proc is not None:
            proc.terminate()
            try:
                proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                proc.kill()
        shutil.rmtree(profile, ignore_errors=True)
    return problems


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--chromium", default="/usr/bin/chromium")
    ap.add_argument("--html", required=True)
    ap.add_argument("--screenshot", required=True)
    ap.add_argument("--width", type=int, default=1100)
    args = ap.parse_args()
    try:
        problems = check(args.chromium, args.html, args.screenshot, args.width)
    except (RuntimeError, ConnectionError, TimeoutError, OSError) as e:
        print(f"error: cannot run the browser check: {e}", file=sys.stderr)
        return 2
    if problems:
        for p in problems:
            print(f"FAIL: {p}", file=sys.stderr)
        return 1
    print("ok: loaded without errors, every figure drawn")
    return 0


if __name__ == "__main__":
    sys.exit(main())
