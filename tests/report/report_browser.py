"""A minimal WebDriver client (standard library only) driving headless Chromium through chromedriver."""

from __future__ import annotations

import base64
import json
import shutil
import socket
import subprocess
import tempfile
import time
import urllib.error
import urllib.request
from pathlib import Path

CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
CHROMEDRIVER = shutil.which("chromedriver") or "/usr/bin/chromedriver"
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
         "--disable-component-update", "--disable-sync", "--window-size=1400,1000"]


def available() -> bool:
    return Path(CHROMIUM).is_file() and Path(CHROMEDRIVER).is_file()


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class Browser:
    def __init__(self) -> None:
        self.port = _free_port()
        self.profile = tempfile.mkdtemp(prefix="studyflow-chromium-")
        self.driver = subprocess.Popen([CHROMEDRIVER, f"--port={self.port}"], stdout=subprocess.DEVNULL,
                                       stderr=subprocess.DEVNULL)
        self.base = f"http://127.0.0.1:{self.port}"
        deadline = time.time() + 20
        while True:
            try:
                self._call("GET", "/status")
                break
            except (urllib.error.URLError, ConnectionError):
                if time.time() > deadline:
                    self.close()
                    raise RuntimeError("chromedriver did not start")
                time.sleep(0.1)
        caps = {"capabilities": {"alwaysMatch": {
            "browserName": "chrome",
            "goog:chromeOptions": {"binary": CHROMIUM, "args": FLAGS + [f"--user-data-dir={self.profile}"]},
            "goog:loggingPrefs": {"browser": "ALL"},
        }}}
        self.session = self._call("POST", "/session", caps)["sessionId"]

    def _call(self, method: str, path: str, body: dict | None = None) -> dict:
        data = None if body is None else json.dumps(body).encode()
        req = urllib.request.Request(self.base + path, data=data, method=method,
                                     headers={"Content-Type": "application/json"})
        with urllib.request.urlopen(req, timeout=60) as resp:
            out = json.loads(resp.read().decode() or "{}")
        return out.get("value", out) if isinstance(out, dict) else out

    def open(self, url: str) -> None:
        self._call("POST", f"/session/{self.session}/url", {"url": url})

    def script(self, source: str, *args) -> object:
        return self._call("POST", f"/session/{self.session}/execute/sync", {"script": source, "args": list(args)})

    def screenshot(self, path: Path) -> None:
        png = self._call("GET", f"/session/{self.session}/screenshot")
        path.write_bytes(base64.b64decode(png))

    def full_screenshot(self, path: Path, width: int = 1400) -> None:
        """The whole page: the window is resized to the document's height first."""
        height = int(self.script("return Math.min(document.documentElement.scrollHeight, 16000);"))
        self._call("POST", f"/session/{self.session}/window/rect", {"width": width, "height": height})
        self.screenshot(path)

    def console(self) -> list[dict]:
        return self._call("POST", f"/session/{self.session}/se/log", {"type": "browser"})

    def close(self) -> None:
        try:
            if getattr(self, "session", None):
                self._call("DELETE", f"/session/{self.session}")
        except (OSError, ValueError):
            pass  # the driver is stopped below either way
        self.driver.terminate()
        try:
            self.driver.wait(10)
        except subprocess.TimeoutExpired:
            self.driver.kill()
        shutil.rmtree(self.profile, ignore_errors=True)
