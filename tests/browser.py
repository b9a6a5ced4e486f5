"""A headless Chromium driven over the DevTools protocol, for the report's browser checks.

Standard library only: the browser is started with ``--remote-debugging-pipe``
and reads protocol commands (JSON, each ended by a NUL byte) on its file
descriptor 3 and answers on 4, so no port is opened and no websocket library
is needed. The page's network is switched off (``Network.emulateNetworkConditions``
offline) and every request the page makes is recorded, so a check can show
that none leaves the machine.

The browser is Debian's ``chromium`` package (``.ci/run`` installs it when
missing); :func:`find_chromium` returns None where there is none. A test tool, not a check: checking a report in
a real browser is common practice; the protocol is Chromium's published DevTools protocol.
"""

from __future__ import annotations

import base64
import json
import os
import shutil
import subprocess
import tempfile
import threading
import time

#: Flags of every start: no sandbox (CI runs as root), no GPU, nothing fetched in the background.
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--disable-default-apps", "--disable-extensions", "--mute-audio", "--hide-scrollbars",
         "--remote-debugging-pipe"]


def find_chromium():
    """Path of a Chromium executable, or None."""
    for name in ("chromium", "chromium-browser"):
        path = shutil.which(name)
        if path:
            return path
    return None


class Browser:
    """``with Browser() as b: page = b.open(url)``: one headless Chromium, closed on exit."""

    def __init__(self, executable=None, timeout=30.0):
        self.executable = executable or find_chromium()
        if self.executable is None:
            raise RuntimeError("no chromium executable")
        self.timeout = timeout
        self._id = 0
        self._replies = {}
        self.events = []
        self._cond = threading.Condition()
        self._buf = b""

    def __enter__(self):
        self.profile = tempfile.mkdtemp(prefix="shpb-chromium-")
        to_browser_r, to_browser_w = os.pipe()
        from_browser_r, from_browser_w = os.pipe()
        high_r, high_w = os.dup(to_browser_r), os.dup(from_browser_w)

        def fds():  # in the child: its fd 3 reads our commands, its fd 4 carries the answers
            os.dup2(high_r, 3)
            os.dup2(high_w, 4)

        self.proc = subprocess.Popen([self.executable, *FLAGS, f"--user-data-dir={self.profile}", "about:blank"],
                                     stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
                                     stderr=subprocess.DEVNULL, preexec_fn=fds, close_fds=False)
        for fd in (to_browser_r, from_browser_w, high_r, high_w):
            os.close(fd)
        self._out = os.fdopen(to_browser_w, "wb", buffering=0)
        self._in = from_browser_r
        self._reader = threading.Thread(target=self._read, daemon=True)
        self._reader.start()
        return self

    def __exit__(self, *exc):
        try:
            self.send("Browser.close", timeout=5.0)
        except Exception:  # noqa: BLE001 - closing anyway
            pass
        try:
            self.proc.wait(5.0)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait(5.0)
        self._out.close()
        shutil.rmtree(self.profile, ignore_errors=True)
        return False

    # ---- the protocol
    def _read(self):
        while True:
            try:
                chunk = os.read(self._in, 1 << 16)
            except OSError:
                chunk = b""
            if not chunk:
                with self._cond:
                    self._closed = True
                    self._cond.notify_all()
                return
            self._buf += chunk
            while b"\0" in self._buf:
                raw, self._buf = self._buf.split(b"\0", 1)
                msg = json.loads(raw)
                with self._cond:
                    if "id" in msg:
                        self._replies[msg["id"]] = msg
                    else:
                        self.events.append(msg)
                    self._cond.notify_all()

    def send(self, method, params=None, session=None, timeout=None):
        """Send one command and wait for its answer (``result``); RuntimeError on a protocol error."""
        self._id += 1
        msg = {"id": self._id, "method": method, "params": params or {}}
        if session:
            msg["sessionId"] = session
        self._out.write(json.dumps(msg).encode() + b"\0")
        deadline = time.monotonic() + (timeout or self.timeout)
        with self._cond:
            while self._id not in self._replies:
                left = deadline - time.monotonic()
                if left <= 0 or getattr(self, "_closed", False):
                    raise TimeoutError(f"no answer to {method}")
                self._cond.wait(left)
            reply = self._replies.pop(self._id)
        if "error" in reply:
            raise RuntimeError(f"{method}: {reply['error']}")
        return reply.get("result", {})

    def wait_event(self, method, session=None, timeout=None):
        deadline = time.monotonic() + (timeout or self.timeout)
        with self._cond:
            while True:
                for ev in self.events:
                    if ev.get("method") == method and (session is None or ev.get("sessionId") == session):
                        return ev
                left = deadline - time.monotonic()
                if left <= 0:
                    raise TimeoutError(f"no {method} event")
                self._cond.wait(left)

    # ---- a page
    def open(self, url, width=1280, height=900):
        """Open ``url`` in a new tab with the network off; returns a :class:`Page` once it has loaded."""
        target = self.send("Target.createTarget", {"url": "about:blank"})["targetId"]
        session = self.send("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        for method in ("Page.enable", "Runtime.enable", "Log.enable", "Network.enable"):
            self.send(method, session=session)
        self.send("Network.emulateNetworkConditions", {"offline": True, "latency": 0, "downloadThroughput": -1,
                                                       "uploadThroughput": -1}, session=session)
        self.send("Emulation.setDeviceMetricsOverride", {"width": width, "height": height, "deviceScaleFactor": 1,
                                                         "mobile": False}, session=session)
        self.send("Page.navigate", {"url": url}, session=session)
        self.wait_event("Page.loadEventFired", session=session)
        return Page(self, session)


class Page:
    """A loaded tab: evaluate JavaScript, read what it logged and requested, take a screenshot."""

    def __init__(self, browser, session):
        self.browser, self.session = browser, session

    def js(self, expression):
        """The value of a JavaScript expression (JSON-able)."""
        res = self.browser.send("Runtime.evaluate", {"expression": expression, "returnByValue": True,
                                                     "awaitPromise": True}, session=self.session)
        if "exceptionDetails" in res:
            raise RuntimeError(f"JavaScript error: {res['exceptionDetails']}")
        return res["result"].get("value")

    def _events(self, method):
        return [e["params"] for e in list(self.browser.events)
                if e.get("method") == method and e.get("sessionId") == self.session]

    def console_errors(self):
        """Console errors, uncaught exceptions and error log entries of the page, as text."""
        out = [" ".join(str(a.get("value", a.get("description", ""))) for a in p.get("args", []))
               for p in self._events("Runtime.consoleAPICalled") if p.get("type") in ("error", "assert")]
        out += [p.get("exceptionDetails", {}).get("text", "exception") for p in self._events("Runtime.exceptionThrown")]
        out += [p["entry"].get("text", "") for p in self._events("Log.entryAdded") if p["entry"].get("level") == "error"]
        return out

    def requests(self):
        """URLs of every request the page made (the document itself included)."""
        return [p["request"]["url"] for p in self._events("Network.requestWillBeSent")]

    def screenshot(self, full_page=False):
        """PNG bytes of the viewport (or of the whole page)."""
        params = {"format": "png"}
        if full_page:
            params["captureBeyondViewport"] = True
            size = self.js("[document.documentElement.scrollWidth, document.documentElement.scrollHeight]")
            params["clip"] = {"x": 0, "y": 0, "width": size[0], "height": size[1], "scale": 1}
        return base64.b64decode(self.browser.send("Page.captureScreenshot", params, session=self.session)["data"])
