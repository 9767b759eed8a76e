"""Load a page in headless Chromium and report what happened (for the HTML
report tests).

Speaks the Chrome DevTools Protocol over ``--remote-debugging-pipe``
(JSON messages separated by NUL bytes on file descriptors 3 and 4), so no
extra Python package and no network port are needed.  Chromium is the one
from the system's packages (Debian: ``apt-get install chromium``).
"""

from __future__ import annotations

import base64
import json
import os
import select
import shutil
import subprocess
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path

__all__ = ["find_chromium", "PageLoad", "Browser", "load_page", "FLAGS"]

#: flags for a quiet, offline, reproducible headless run
FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--disable-extensions", "--hide-scrollbars", "--mute-audio",
         # nothing on the page may need the network: every host name fails to resolve
         "--host-resolver-rules=MAP * ~NOTFOUND")


def find_chromium() -> str | None:
    for name in ("chromium", "chromium-browser", "google-chrome", "google-chrome-stable"):
        path = shutil.which(name)
        if path:
            return path
    return None


@dataclass
class PageLoad:
    """What loading the page gave."""

    #: console errors, uncaught exceptions and error log entries (e.g. a failed resource), as text
    errors: list[str] = field(default_factory=list)
    #: the value of the probe expression evaluated after the load event
    probe: object = None
    #: a PNG screenshot of the top of the page
    screenshot_png: bytes = b""


class _Pipe:
    def __init__(self, proc, write_fd: int, read_fd: int):
        self.proc, self.w, self.r = proc, write_fd, read_fd
        self.buffer = b""
        self.next_id = 0
        self.events: list[dict] = []

    def send(self, method: str, params: dict | None = None, session: str | None = None) -> int:
        self.next_id += 1
        msg = {"id": self.next_id, "method": method, "params": params or {}}
        if session:
            msg["sessionId"] = session
        os.write(self.w, json.dumps(msg).encode() + b"\0")
        return self.next_id

    def _read_one(self, deadline: float) -> dict:
        while b"\0" not in self.buffer:
            left = deadline - time.monotonic()
            if left <= 0:
                raise TimeoutError("no answer from Chromium")
            ready, _, _ = select.select([self.r], [], [], left)
            if ready:
                chunk = os.read(self.r, 1 << 20)
                if not chunk:
                    raise RuntimeError("Chromium closed the pipe")
                self.buffer += chunk
        raw, _, self.buffer = self.buffer.partition(b"\0")
        return json.loads(raw)

    def call(self, method: str, params: dict | None = None, session: str | None = None,
             timeout_s: float = 30.0) -> dict:
        wanted = self.send(method, params, session)
        deadline = time.monotonic() + timeout_s
        while True:
            msg = self._read_one(deadline)
            if msg.get("id") == wanted:
                if "error" in msg:
                    raise RuntimeError(f"{method}: {msg['error']}")
                return msg.get("result", {})
            self.events.append(msg)

    def wait_event(self, method: str, session: str | None = None, timeout_s: float = 30.0) -> dict:
        """The first event ``method`` (of ``session`` when given); other messages are kept."""
        def wanted(ev: dict) -> bool:
            return ev.get("method") == method and (session is None or ev.get("sessionId") == session)

        for i, ev in enumerate(self.events):
            if wanted(ev):
                return self.events.pop(i)
        deadline = time.monotonic() + timeout_s
        while True:
            msg = self._read_one(deadline)
            if wanted(msg):
                return msg
            self.events.append(msg)

    def take_events(self, session: str) -> list[dict]:
        """The kept events of ``session``, removed from the list."""
        mine = [ev for ev in self.events if ev.get("sessionId") == session]
        self.events = [ev for ev in self.events if ev.get("sessionId") != session]
        return mine


def _errors(events: list[dict]) -> list[str]:
    out = []
    for ev in events:
        m, p = ev.get("method"), ev.get("params", {})
        if m == "Runtime.consoleAPICalled" and p.get("type") in ("error", "assert"):
            out.append("console: " + " ".join(str(a.get("value", a.get("description", ""))) for a in p["args"]))
        elif m == "Runtime.exceptionThrown":
            out.append("exception: " + json.dumps(p.get("exceptionDetails", {}))[:500])
        elif m == "Log.entryAdded" and p.get("entry", {}).get("level") == "error":
            e = p["entry"]
            out.append(f"log ({e.get('source')}): {e.get('text')} {e.get('url', '')}")
    return out


class Browser:
    """One headless Chromium process; each :meth:`load` opens the page in a
    new tab of its own, collects that tab's errors and closes it.

    Starting Chromium is most of the cost of looking at a small page, so a
    test module that checks several pages shares one ``Browser``
    (``with Browser() as b: b.load(...)``).
    """

    def __init__(self, *, width: int = 1280, height: int = 900, timeout_s: float = 60.0):
        exe = find_chromium()
        if exe is None:
            raise FileNotFoundError("no chromium on PATH")
        self.timeout_s = timeout_s
        self._profile = tempfile.TemporaryDirectory(prefix="chain-chromium-")
        to_child_r, to_child_w = os.pipe()
        from_child_r, from_child_w = os.pipe()

        def fds():  # the protocol wants the child's fd 3 (commands) and fd 4 (answers)
            hi_r, hi_w = os.dup(to_child_r), os.dup(from_child_w)
            os.dup2(hi_r, 3)
            os.dup2(hi_w, 4)
            # when 3 and 4 were free, the dups above are 3 and 4 themselves, dup2 leaves them
            # close-on-exec and Chromium starts without its pipe ("file descriptors are not open")
            os.set_inheritable(3, True)
            os.set_inheritable(4, True)

        proc = subprocess.Popen([exe, *FLAGS, f"--user-data-dir={self._profile.name}", "--remote-debugging-pipe",
                                 f"--window-size={width},{height}", "about:blank"],
                                stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                                preexec_fn=fds, close_fds=False)
        os.close(to_child_r)
        os.close(from_child_w)
        self._pipe = _Pipe(proc, to_child_w, from_child_r)

    def load(self, path: Path, *, probe: str, width: int = 1280, height: int = 900) -> PageLoad:
        """Open ``path`` in a new tab, wait for the load event, evaluate
        ``probe`` (a JavaScript expression whose value is returned), collect
        every error of that tab and take a screenshot of the top
        ``width`` × ``height``."""
        pipe, timeout_s = self._pipe, self.timeout_s
        target = pipe.call("Target.createTarget", {"url": "about:blank"}, timeout_s=timeout_s)["targetId"]
        session = pipe.call("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        result = PageLoad()
        try:
            for domain in ("Runtime.enable", "Log.enable", "Page.enable"):
                pipe.call(domain, session=session)
            pipe.call("Emulation.setDeviceMetricsOverride",
                      {"width": width, "height": height, "deviceScaleFactor": 1, "mobile": False}, session=session)
            pipe.call("Page.navigate", {"url": path.resolve().as_uri()}, session=session)
            pipe.wait_event("Page.loadEventFired", session=session, timeout_s=timeout_s)
            value = pipe.call("Runtime.evaluate", {"expression": probe, "returnByValue": True}, session=session)
            result.probe = value.get("result", {}).get("value")
            shot = pipe.call("Page.captureScreenshot", {"format": "png"}, session=session, timeout_s=timeout_s)
            result.screenshot_png = base64.b64decode(shot["data"])
            result.errors = _errors(pipe.take_events(session))
        finally:
            try:
                pipe.call("Target.closeTarget", {"targetId": target}, timeout_s=timeout_s)
            except (RuntimeError, TimeoutError):
                pass
            pipe.take_events(session)
        return result

    def close(self) -> None:
        pipe = self._pipe
        try:
            pipe.call("Browser.close", timeout_s=5.0)
        except (RuntimeError, TimeoutError, OSError):
            pass
        finally:
            os.close(pipe.w)
            os.close(pipe.r)
            try:
                pipe.proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                pipe.proc.kill()
                pipe.proc.wait()
            self._profile.cleanup()

    def __enter__(self) -> "Browser":
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def load_page(path: Path, *, probe: str, width: int = 1280, height: int = 900,
              timeout_s: float = 60.0) -> PageLoad:
    """Open ``path`` in a headless Chromium of its own (see :meth:`Browser.load`)."""
    with Browser(width=width, height=height, timeout_s=timeout_s) as browser:
        return browser.load(path, probe=probe, width=width, height=height)
