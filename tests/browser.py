"""Headless Chromium driven through the DevTools protocol over a pipe (no extra package).

Chromium started with ``--remote-debugging-pipe`` reads protocol messages from file
descriptor 3 and writes them to descriptor 4, each JSON message ended by a NUL byte
(Chrome DevTools Protocol, "remote-debugging-pipe" transport). ``Browser`` opens a page,
records every network request the page makes, evaluates scripts and takes screenshots.
"""
from __future__ import annotations

import base64
import io
import json
import os
import subprocess
import time

import numpy as np

CHROMIUM = "/usr/bin/chromium"
INSTALL = "apt-get install -y chromium"


def require(*paths: str, purpose: str, install: str = INSTALL) -> None:
    """Skip (fail under CI=true, where .ci/run installs them) when a browser part is absent.

    The README's test command must pass on a fresh machine with Python alone, so a missing
    browser is reported as a skip with the line that installs it.
    """
    absent = [p for p in paths if not os.path.exists(p)]
    if absent:
        missing_part(", ".join(absent), purpose=purpose, install=install)


def missing_part(what: str, purpose: str, install: str = INSTALL) -> None:
    """Skip the test naming what is missing and how to install it; fail under CI=true."""
    import pytest
    missing = pytest.fail if os.environ.get("CI") == "true" else pytest.skip
    missing(f"{what} is needed for {purpose}: {install}")


class Browser:
    def __init__(self, profile, size=(1200, 800)):
        to_child_r, self._to_child = os.pipe()
        self._from_child, from_child_w = os.pipe()
        cmd = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu",
               "--enable-unsafe-swiftshader",
               "--remote-debugging-pipe", "--no-first-run", "--disable-background-networking",
               "--disable-component-update", "--disable-sync", "--disable-quic",
               f"--user-data-dir={profile}", f"--window-size={size[0]},{size[1]}",
               "--hide-scrollbars", "about:blank"]
        self.proc = subprocess.Popen(
            cmd, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
            pass_fds=(3, 4), preexec_fn=_fds(to_child_r, from_child_w))
        os.close(to_child_r)
        os.close(from_child_w)
        self._buffer = b""
        self._next_id = 0
        self.events: list[dict] = []
        target = next(t for t in self.call("Target.getTargets")["targetInfos"]
                      if t["type"] == "page")
        self.session = self.call("Target.attachToTarget", targetId=target["targetId"],
                                 flatten=True)["sessionId"]
        for domain in ("Page", "Network", "Runtime"):
            self.call(f"{domain}.enable", session=True)

    # --- the protocol ---------------------------------------------------------------
    def _send(self, message: dict) -> None:
        os.write(self._to_child, json.dumps(message).encode() + b"\0")

    def _receive(self, timeout: float) -> dict:
        import select
        deadline = time.monotonic() + timeout
        while b"\0" not in self._buffer:
            left = deadline - time.monotonic()
            if left <= 0 or not select.select([self._from_child], [], [], left)[0]:
                raise TimeoutError("no answer from Chromium")
            chunk = os.read(self._from_child, 1 << 20)
            if not chunk:
                raise RuntimeError("Chromium closed the pipe")
            self._buffer += chunk
        message, self._buffer = self._buffer.split(b"\0", 1)
        return json.loads(message)

    def call(self, method: str, session: bool = False, timeout: float = 60.0, **params):
        self._next_id += 1
        message = {"id": self._next_id, "method": method, "params": params}
        if session:
            message["sessionId"] = self.session
        self._send(message)
        while True:
            reply = self._receive(timeout)
            if reply.get("id") == self._next_id:
                if "error" in reply:
                    raise RuntimeError(f"{method}: {reply['error']}")
                return reply.get("result", {})
            self.events.append(reply)

    def wait_for(self, event: str, timeout: float = 60.0) -> dict:
        for e in self.events:
            if e.get("method") == event:
                return e
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            e = self._receive(deadline - time.monotonic())
            self.events.append(e)
            if e.get("method") == event:
                return e
        raise TimeoutError(event)

    # --- what the tests use ----------------------------------------------------------
    def open(self, url: str, size=(1200, 800)) -> None:
        self.call("Emulation.setDeviceMetricsOverride", session=True, width=size[0],
                  height=size[1], deviceScaleFactor=1, mobile=False)
        self.call("Page.navigate", session=True, url=url)
        self.wait_for("Page.loadEventFired")

    def evaluate(self, expression: str):
        result = self.call("Runtime.evaluate", session=True, expression=expression,
                           returnByValue=True, awaitPromise=True)
        if "exceptionDetails" in result:
            raise RuntimeError(f"{expression}: {result['exceptionDetails']}")
        return result["result"].get("value")

    def requests(self) -> list[str]:
        """URLs of every request the page made so far."""
        self.call("Runtime.evaluate", session=True, expression="1")     # flush events
        return [e["params"]["request"]["url"] for e in self.events
                if e.get("method") == "Network.requestWillBeSent"]

    def screenshot(self) -> np.ndarray:
        from PIL import Image
        data = self.call("Page.captureScreenshot", session=True, format="png")["data"]
        return np.asarray(Image.open(io.BytesIO(base64.b64decode(data))).convert("RGB")).astype(int)

    def close(self) -> None:
        try:
            self._send({"id": 0, "method": "Browser.close"})
            self.proc.wait(timeout=20)
        except Exception:
            self.proc.kill()
            self.proc.wait()
        finally:
            os.close(self._to_child)
            os.close(self._from_child)


def _fds(read_end: int, write_end: int):
    """In the child: commands on fd 3, replies on fd 4."""
    def setup():
        import fcntl
        r, w = (fcntl.fcntl(fd, fcntl.F_DUPFD, 10) for fd in (read_end, write_end))
        os.dup2(r, 3)
        os.dup2(w, 4)
    return setup
