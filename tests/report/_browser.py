"""A minimal headless-Chromium driver for tests: the Chrome DevTools protocol over a pipe.

Chromium started with ``--remote-debugging-pipe`` reads protocol commands
from file descriptor 3 and writes replies and events to descriptor 4, each a
JSON text ended by a NUL byte (Chrome DevTools protocol documentation). Only
the standard library is needed; nothing is downloaded.
"""

from __future__ import annotations

import fcntl
import json
import os
import shutil
import subprocess
import tempfile
import time
from typing import Any

__all__ = ["find_browser", "Browser"]

_CANDIDATES = ("chromium", "chromium-browser", "google-chrome", "google-chrome-stable")


def find_browser() -> str | None:
    """Path of an installed Chromium-family browser, or None."""
    for name in _CANDIDATES:
        path = shutil.which(name)
        if path:
            return path
    return None


class Browser:
    """One headless browser with one page, driven over the DevTools pipe.

    Parameters
    ----------
    executable : str
    width, height : int
        Size of the page's viewport in CSS pixels.
    """

    def __init__(self, executable: str, *, width: int = 1280, height: int = 800, timeout: float = 60.0) -> None:
        self.timeout = timeout
        self._profile = tempfile.mkdtemp(prefix="divides-browser-")
        to_child_r, self._to_child = os.pipe()
        self._from_child, from_child_w = os.pipe()
        # move the child's ends well above 4 so that placing them on 3 and 4 cannot clobber each other
        hi_r = fcntl.fcntl(to_child_r, fcntl.F_DUPFD, 100)
        hi_w = fcntl.fcntl(from_child_w, fcntl.F_DUPFD, 100)
        os.close(to_child_r)
        os.close(from_child_w)

        def _place() -> None:  # in the child, before exec
            os.dup2(hi_r, 3)
            os.dup2(hi_w, 4)

        args = [executable, "--headless=new", "--remote-debugging-pipe", "--no-first-run", "--no-default-browser-check",
                "--disable-gpu", "--disable-extensions", "--disable-background-networking", "--mute-audio",
                f"--user-data-dir={self._profile}", f"--window-size={width},{height}", "about:blank"]
        if hasattr(os, "geteuid") and os.geteuid() == 0:
            args.insert(1, "--no-sandbox")  # Chromium refuses to run its sandbox as root
        self._proc = subprocess.Popen(args, preexec_fn=_place, pass_fds=(3, 4), stdin=subprocess.DEVNULL,
                                      stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        os.close(hi_r)
        os.close(hi_w)
        self._buffer = b""
        self._next_id = 0
        self.events: list[dict] = []
        target = self.call("Target.createTarget", {"url": "about:blank"})["targetId"]
        self.session = self.call("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        for domain in ("Page", "Runtime", "Log"):
            self.call(f"{domain}.enable", session=True)
        self.call("Emulation.setDeviceMetricsOverride",
                  {"width": width, "height": height, "deviceScaleFactor": 1, "mobile": False}, session=True)

    # ------------------------------------------------------------------ protocol
    def _send(self, message: dict) -> None:
        data = json.dumps(message).encode() + b"\0"
        while data:
            data = data[os.write(self._to_child, data):]

    def _receive(self, deadline: float) -> dict:
        while b"\0" not in self._buffer:
            if time.monotonic() > deadline:
                raise TimeoutError("the browser did not answer in time")
            chunk = os.read(self._from_child, 1 << 16)
            if not chunk:
                raise RuntimeError("the browser closed its DevTools pipe")
            self._buffer += chunk
        text, self._buffer = self._buffer.split(b"\0", 1)
        return json.loads(text)

    def call(self, method: str, params: dict | None = None, *, session: bool = False) -> dict:
        """Send one command and return its result (events seen meanwhile are kept in :attr:`events`)."""
        self._next_id += 1
        message: dict[str, Any] = {"id": self._next_id, "method": method, "params": params or {}}
        if session:
            message["sessionId"] = self.session
        self._send(message)
        deadline = time.monotonic() + self.timeout
        while True:
            reply = self._receive(deadline)
            if reply.get("id") == self._next_id:
                if "error" in reply:
                    raise RuntimeError(f"{method}: {reply['error']}")
                return reply.get("result", {})
            self.events.append(reply)

    def wait_for(self, method: str) -> dict:
        """Wait for an event of the page (e.g. ``Page.loadEventFired``)."""
        for i, event in enumerate(self.events):
            if event.get("method") == method:
                return self.events.pop(i)
        deadline = time.monotonic() + self.timeout
        while True:
            event = self._receive(deadline)
            if event.get("method") == method:
                return event
            self.events.append(event)

    # ------------------------------------------------------------------ page
    def open(self, url: str) -> None:
        """Load ``url`` and wait for its load event."""
        self.events.clear()
        self.call("Page.navigate", {"url": url}, session=True)
        self.wait_for("Page.loadEventFired")

    def evaluate(self, expression: str) -> Any:
        """The JSON value of a JavaScript expression in the page."""
        result = self.call("Runtime.evaluate", {"expression": expression, "returnByValue": True,
                                                "awaitPromise": True}, session=True)
        if "exceptionDetails" in result:
            raise RuntimeError(f"script failed: {result['exceptionDetails']}")
        return result["result"].get("value")

    def console_errors(self) -> list[str]:
        """Console errors, uncaught exceptions and browser log errors seen since the page was opened."""
        errors = []
        for event in self.events:
            method, params = event.get("method"), event.get("params", {})
            if method == "Runtime.exceptionThrown":
                errors.append(str(params.get("exceptionDetails", {}).get("text")))
            elif method == "Runtime.consoleAPICalled" and params.get("type") in ("error", "assert"):
                errors.append(" ".join(str(a.get("value", a.get("description"))) for a in params.get("args", [])))
            elif method == "Log.entryAdded" and params.get("entry", {}).get("level") == "error":
                errors.append(str(params["entry"].get("text")))
        return errors

    def close(self) -> None:
        """End the browser and remove its profile folder."""
        try:
            self._send({"id": self._next_id + 1, "method": "Browser.close", "params": {}})
            self._proc.wait(timeout=10)
        except (OSError, subprocess.TimeoutExpired):
            self._proc.kill()
            self._proc.wait(timeout=10)
        finally:
            for fd in (self._to_child, self._from_child):
                try:
                    os.close(fd)
                except OSError:
                    pass
            shutil.rmtree(self._profile, ignore_errors=True)
