"""A headless Chromium driven over the DevTools protocol on a pipe, with the standard library only.

Used by tests/test_html_report.py to open a report as a reader would and
collect what the browser says about it: console messages, exceptions, log
entries (failed loads), every request it made, and screenshots of elements.
Chromium reads protocol messages (JSON, each ended by a NUL byte) on file
descriptor 3 and writes its answers and events on descriptor 4
(``--remote-debugging-pipe``).  Not collected by pytest.
"""

from __future__ import annotations

import base64
import fcntl
import json
import os
import select
import shutil
import subprocess
import tempfile
import time
from typing import Any

BROWSERS = ("chromium", "chromium-browser", "google-chrome", "google-chrome-stable")


def find_browser() -> str | None:
    """Path of an installed Chromium (Debian's package is `chromium`), or None."""
    for name in BROWSERS:
        path = shutil.which(name)
        if path:
            return path
    return None


class BrowserError(RuntimeError):
    """The browser did not start or did not answer in time."""


class Chromium:
    """One headless browser process with one page; use as a context manager."""

    def __init__(self, binary: str, timeout_s: float = 30.0) -> None:
        self.timeout_s = timeout_s
        self.profile = tempfile.TemporaryDirectory(prefix="termination-chromium-")
        to_browser_r, self._to_browser = os.pipe()
        self._from_browser, from_browser_w = os.pipe()

        def child_fds() -> None:
            # Descriptors 3 and 4 are the protocol's, by the browser's convention.  Move both ends out of
            # the way first (one of them may be 3 or 4); dup2 makes the copies inheritable, while the
            # originals are closed on exec (PEP 446).
            high_r = fcntl.fcntl(to_browser_r, fcntl.F_DUPFD, 10)
            high_w = fcntl.fcntl(from_browser_w, fcntl.F_DUPFD, 10)
            os.dup2(high_r, 3)
            os.dup2(high_w, 4)

        args = [
            binary,
            "--headless=new",
            "--remote-debugging-pipe",
            "--no-sandbox",  # CI containers run as root, where the sandbox cannot start
            "--disable-gpu",
            "--no-first-run",
            "--no-default-browser-check",
            "--disable-extensions",
            "--disable-background-networking",
            "--disable-component-update",
            f"--user-data-dir={self.profile.name}",
            "about:blank",
        ]
        self.process = subprocess.Popen(
            args,
            stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.PIPE,
            close_fds=False,  # only inheritable descriptors survive exec: 0, 1, 2, 3 and 4
            preexec_fn=child_fds,
        )
        os.close(to_browser_r)
        os.close(from_browser_w)
        self._buffer = b""
        self._next_id = 0
        self.events: list[dict[str, Any]] = []
        self.session: str | None = None

    def __enter__(self) -> Chromium:
        target = self.call("Target.createTarget", {"url": "about:blank"})["targetId"]
        self.session = self.call("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        for domain in ("Page", "Runtime", "Log", "Network"):
            self.call(f"{domain}.enable")
        return self

    def __exit__(self, *exc: object) -> None:
        try:
            self.call("Browser.close", session=False)
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
        if self.process.stderr is not None:
            self.process.stderr.close()
        self.profile.cleanup()

    # ----------------------------------------------------------------- protocol

    def _read_message(self, deadline: float) -> dict[str, Any]:
        while b"\0" not in self._buffer:
            left = deadline - time.monotonic()
            if left <= 0:
                raise BrowserError("Chromium did not answer in time")
            ready, _, _ = select.select([self._from_browser], [], [], left)
            if not ready:
                continue
            chunk = os.read(self._from_browser, 1 << 20)
            if not chunk:
                err = self.process.stderr.read().decode(errors="replace") if self.process.stderr else ""
                raise BrowserError(f"Chromium closed the pipe: {err.strip()[-500:]}")
            self._buffer += chunk
        raw, self._buffer = self._buffer.split(b"\0", 1)
        return dict(json.loads(raw))

    def call(self, method: str, params: dict[str, Any] | None = None, *, session: bool = True) -> dict[str, Any]:
        """Send one command and wait for its answer; events that arrive meanwhile are kept in ``events``."""
        self._next_id += 1
        message: dict[str, Any] = {"id": self._next_id, "method": method, "params": params or {}}
        if session and self.session is not None:
            message["sessionId"] = self.session
        os.write(self._to_browser, json.dumps(message).encode() + b"\0")
        deadline = time.monotonic() + self.timeout_s
        while True:
            reply = self._read_message(deadline)
            if reply.get("id") == self._next_id:
                if "error" in reply:
                    raise BrowserError(f"{method}: {reply['error']}")
                return dict(reply.get("result", {}))
            if "method" in reply:
                self.events.append(reply)

    def wait_for(self, method: str) -> dict[str, Any]:
        """The first event ``method`` (already received, or the next to come)."""
        for event in self.events:
            if event["method"] == method:
                return event
        deadline = time.monotonic() + self.timeout_s
        while True:
            event = self._read_message(deadline)
            if "method" in event:
                self.events.append(event)
                if event["method"] == method:
                    return event

    # ----------------------------------------------------------------- page

    def open(self, url: str) -> None:
        """Load ``url`` and wait for its load event."""
        self.call("Page.navigate", {"url": url})
        self.wait_for("Page.loadEventFired")

    def evaluate(self, expression: str) -> Any:
        """The value of a JavaScript expression in the page (returned by value)."""
        result = self.call("Runtime.evaluate", {"expression": expression, "returnByValue": True})
        if "exceptionDetails" in result:
            raise BrowserError(f"JavaScript failed: {result['exceptionDetails']}")
        return result["result"].get("value")

    def screenshot(self, x: float, y: float, width: float, height: float) -> bytes:
        """PNG of a rectangle of the page (CSS pixels, from the top of the document)."""
        clip = {"x": x, "y": y, "width": width, "height": height, "scale": 1}
        data = self.call("Page.captureScreenshot", {"format": "png", "clip": clip, "captureBeyondViewport": True})
        return base64.b64decode(data["data"])

    def problems(self) -> list[str]:
        """Console errors and warnings, uncaught exceptions and error log entries seen so far."""
        out = []
        for e in self.events:
            p = e.get("params", {})
            if e["method"] == "Runtime.consoleAPICalled" and p.get("type") in ("error", "warning", "assert"):
                out.append(f"console {p['type']}: {[a.get('value') for a in p.get('args', [])]}")
            elif e["method"] == "Runtime.exceptionThrown":
                out.append(f"exception: {p.get('exceptionDetails', {}).get('text')}")
            elif e["method"] == "Log.entryAdded" and p.get("entry", {}).get("level") in ("error", "warning"):
                entry = p["entry"]
                out.append(f"log {entry['level']}: {entry.get('text')} {entry.get('url', '')}")
        return out

    def requests(self) -> list[str]:
        """URLs of every request the page made."""
        return [e["params"]["request"]["url"] for e in self.events if e["method"] == "Network.requestWillBeSent"]
