"""Headless Chromium for tests: install it from the Debian packages when missing, and drive it with a small
Chrome DevTools Protocol client over ``--remote-debugging-pipe`` (file descriptors 3 and 4, messages separated by
NUL bytes; the protocol is documented at chromedevtools.github.io/devtools-protocol). Standard library only.
"""

from __future__ import annotations

import base64
import json
import os
import shutil
import subprocess
import time
from pathlib import Path
from typing import Any

CHROMIUM = Path("/usr/bin/chromium")
# This machine's network is closed: everything that phones home is switched off, and a fresh profile is used.
FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--disable-dev-shm-usage", "--remote-debugging-pipe")


def ensure_chromium(timeout_seconds: int = 900) -> tuple[Path | None, str]:
    """Path of Chromium, installing Debian's ``chromium`` package with apt when it is missing and apt is usable.

    Returns (path, "") or (None, why it cannot be had). Installing needs root; for anyone else this only reports.
    """
    if CHROMIUM.exists():
        return CHROMIUM, ""
    if shutil.which("apt-get") is None:
        return None, "Chromium is not installed and apt-get is not available to install it"
    if os.geteuid() != 0:
        return None, "Chromium is not installed; run `sudo apt-get install -y chromium` (installing needs root)"
    env = {**os.environ, "DEBIAN_FRONTEND": "noninteractive"}
    install = ["apt-get", "install", "-y", "-q", "--no-install-recommends", "chromium"]
    for attempt in (install, ["apt-get", "update", "-q"], install):  # retry once after refreshing the lists
        done = subprocess.run(attempt, env=env, capture_output=True, text=True, timeout=timeout_seconds)
        if done.returncode == 0 and CHROMIUM.exists():
            return CHROMIUM, ""
    return None, f"apt-get could not install chromium: {(done.stderr or done.stdout).strip().splitlines()[-1:]}"


class Browser:
    """One headless Chromium process and one page, driven through the DevTools protocol over a pipe."""

    def __init__(self, executable: Path, profile_dir: Path, width: int = 1280, height: int = 900):
        to_browser_r, self._to_browser = os.pipe()
        self._from_browser, from_browser_w = os.pipe()
        profile_dir.mkdir(parents=True, exist_ok=True)
        # the browser reads commands on its fd 3 and writes replies and events on its fd 4
        def _place_pipe_ends() -> None:  # in the child, before exec: fds 3 and 4, inheritable (dup2 clears CLOEXEC)
            r, w = os.dup(to_browser_r), os.dup(from_browser_w)  # first out of the way of 3 and 4
            os.dup2(r, 3)
            os.dup2(w, 4)

        self._proc = subprocess.Popen(
            [str(executable), *FLAGS, f"--user-data-dir={profile_dir}", f"--window-size={width},{height}",
             "about:blank"],
            close_fds=False, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
            preexec_fn=_place_pipe_ends)
        os.close(to_browser_r)
        os.close(from_browser_w)
        self._buffer = b""
        self._next_id = 0
        self.events: list[dict] = []
        target = self.call("Target.createTarget", url="about:blank")["targetId"]
        self._session = self.call("Target.attachToTarget", targetId=target, flatten=True)["sessionId"]
        for domain in ("Page", "Runtime", "Log", "Network"):
            self.call(f"{domain}.enable", session=True)
        self.call("Emulation.setDeviceMetricsOverride", session=True, width=width, height=height,
                  deviceScaleFactor=1, mobile=False)

    def _send(self, message: dict) -> None:
        os.write(self._to_browser, json.dumps(message).encode("utf-8") + b"\0")

    def _receive(self, deadline: float) -> dict:
        while b"\0" not in self._buffer:
            if time.monotonic() > deadline:
                raise TimeoutError("no answer from Chromium in time")
            chunk = os.read(self._from_browser, 1 << 16)
            if not chunk:
                raise RuntimeError("Chromium closed the DevTools pipe")
            self._buffer += chunk
        raw, self._buffer = self._buffer.split(b"\0", 1)
        return json.loads(raw)

    def call(self, method: str, session: bool = False, timeout_seconds: float = 60, **params: Any) -> dict:
        self._next_id += 1
        message: dict[str, Any] = {"id": self._next_id, "method": method, "params": params}
        if session:
            message["sessionId"] = self._session
        self._send(message)
        deadline = time.monotonic() + timeout_seconds
        while True:
            reply = self._receive(deadline)
            if reply.get("id") == self._next_id:
                if "error" in reply:
                    raise RuntimeError(f"{method}: {reply['error']}")
                return reply.get("result", {})
            self.events.append(reply)

    def wait_for(self, method: str, timeout_seconds: float = 60) -> dict:
        for event in self.events:
            if event.get("method") == method:
                return event
        deadline = time.monotonic() + timeout_seconds
        while True:
            event = self._receive(deadline)
            self.events.append(event)
            if event.get("method") == method:
                return event

    def open(self, url: str) -> None:
        self.events.clear()
        self.call("Page.navigate", session=True, url=url)
        self.wait_for("Page.loadEventFired")

    def evaluate(self, expression: str) -> Any:
        result = self.call("Runtime.evaluate", session=True, expression=expression, returnByValue=True,
                           awaitPromise=True)
        if "exceptionDetails" in result:
            raise RuntimeError(f"script failed: {result['exceptionDetails']}")
        return result["result"].get("value")

    def console_errors(self) -> list[str]:
        """Console errors, uncaught exceptions and failed loads seen since the last ``open``."""
        found = []
        for e in self.events:
            method, params = e.get("method"), e.get("params", {})
            if method == "Runtime.consoleAPICalled" and params.get("type") in ("error", "assert"):
                found.append(" ".join(str(a.get("value", a.get("description", ""))) for a in params["args"]))
            elif method == "Runtime.exceptionThrown":
                found.append(params["exceptionDetails"].get("text", "exception"))
            elif method == "Log.entryAdded" and params["entry"].get("level") == "error":
                found.append(params["entry"].get("text", ""))
            elif method == "Network.loadingFailed":
                found.append(f"failed to load: {params.get('errorText')}")
        return found

    def requested_urls(self) -> list[str]:
        return [e["params"]["request"]["url"] for e in self.events if e.get("method") == "Network.requestWillBeSent"]

    def screenshot(self, path: Path, full_page: bool = False) -> Path:
        params: dict[str, Any] = {"format": "png"}
        if full_page:
            size = self.call("Page.getLayoutMetrics", session=True)["cssContentSize"]
            params.update(captureBeyondViewport=True,
                          clip={"x": 0, "y": 0, "width": size["width"], "height": size["height"], "scale": 1})
        data = self.call("Page.captureScreenshot", session=True, **params)["data"]
        path.write_bytes(base64.b64decode(data))
        return path

    def close(self) -> None:
        try:
            self._send({"id": self._next_id + 1, "method": "Browser.close", "params": {}})
            self._proc.wait(timeout=15)
        except (OSError, subprocess.TimeoutExpired):
            self._proc.kill()
            self._proc.wait(timeout=15)
        finally:
            os.close(self._to_browser)
            os.close(self._from_browser)

    def __enter__(self) -> "Browser":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
