"""The HTML report in a real headless browser (Debian's chromium).

The browser is driven over the Chrome DevTools Protocol on a pipe
(``--remote-debugging-pipe``: commands on fd 3, replies on fd 4, each message JSON
followed by a NUL byte), so no websocket client is needed. The test checks that every
image decodes, that loading the page asked for nothing but the file itself and its data
URIs, and that a full-page screenshot at 1280 px is not blank.
"""

from __future__ import annotations

import base64
import fcntl
import io
import json
import os
import shutil
import subprocess
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from curvefit.core.curve import Curve

BROWSER_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update",
                 "--disable-sync", "--disable-quic", "--disable-extensions",
                 "--host-resolver-rules=MAP * ~NOTFOUND"]


def _browser() -> str | None:
    for name in ("chromium", "chromium-browser", "google-chrome"):
        path = shutil.which(name)
        if path:
            return path
    return "/usr/bin/chromium" if os.path.exists("/usr/bin/chromium") else None


class Devtools:
    """A minimal CDP client over the browser's debugging pipe."""

    def __init__(self, browser: str, profile: str):
        to_browser_r, self._w = os.pipe()      # we write commands, the browser reads fd 3
        self._r, from_browser_w = os.pipe()    # the browser writes fd 4, we read
        # move the child's ends above 10 so that placing them on 3 and 4 clobbers nothing
        hi_r, hi_w = (fcntl.fcntl(fd, fcntl.F_DUPFD, 10) for fd in (to_browser_r, from_browser_w))
        os.close(to_browser_r)
        os.close(from_browser_w)

        def place_fds():
            os.dup2(hi_r, 3)
            os.dup2(hi_w, 4)

        # fds 3 and 4 are listed too: subprocess closes unlisted fds after preexec_fn
        self.proc = subprocess.Popen(
            [browser, *BROWSER_FLAGS, f"--user-data-dir={profile}", "--remote-debugging-pipe",
             "about:blank"],
            pass_fds=(3, 4, hi_r, hi_w), stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
            preexec_fn=place_fds)
        os.close(hi_r)
        os.close(hi_w)
        self._buf = b""
        self._next = 0
        self.events: list[dict] = []

    def _read_message(self, deadline: float) -> dict:
        while b"\0" not in self._buf:
            if time.monotonic() > deadline:
                raise TimeoutError("the browser did not answer in time")
            chunk = os.read(self._r, 1 << 16)
            if not chunk:
                raise RuntimeError("the browser closed the debugging pipe")
            self._buf += chunk
        msg, self._buf = self._buf.split(b"\0", 1)
        return json.loads(msg)

    def send(self, method: str, params: dict | None = None, session: str | None = None,
             timeout: float = 60.0) -> dict:
        self._next += 1
        msg = {"id": self._next, "method": method, "params": params or {}}
        if session:
            msg["sessionId"] = session
        os.write(self._w, json.dumps(msg).encode() + b"\0")
        deadline = time.monotonic() + timeout
        while True:
            reply = self._read_message(deadline)
            if reply.get("id") == self._next:
                if "error" in reply:
                    raise RuntimeError(f"{method}: {reply['error']}")
                return reply.get("result", {})
            self.events.append(reply)

    def wait_event(self, method: str, timeout: float = 60.0) -> dict:
        for ev in self.events:
            if ev.get("method") == method:
                return ev
        deadline = time.monotonic() + timeout
        while True:
            ev = self._read_message(deadline)
            self.events.append(ev)
            if ev.get("method") == method:
                return ev

    def close(self):
        try:
            self.send("Browser.close", timeout=10)
        except Exception:  # noqa: BLE001 - the browser may already be gone
            pass
        try:
            self.proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        os.close(self._w)
        os.close(self._r)


def _report_file(tmp_path: Path) -> Path:
    """A two-model report with fits, built from scikit-learn's breast_cancer data."""
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler
    from sklearn.tree import DecisionTreeClassifier

    import curvefit as cf
    from curvefit.report import html as report
    from curvefit.workflows import analysis

    X, y = load_breast_cancer(return_X_y=True)
    curves = {}
    for label, model in [("logistic", make_pipeline(StandardScaler(),
                                                    LogisticRegression(max_iter=300))),
                         ("tree <b>depth 3</b>", DecisionTreeClassifier(max_depth=3))]:
        curves[label] = cf.measure(model, X, y, sizes=[30, 60, 120, 240, 400], repeats=3,
                                   random_state=0)
    results = analysis.analyse(curves, target_error=0.06, bootstrap=30)
    return report.write_report(tmp_path / "report.html", results, target_error=0.06)


def test_report_in_headless_browser(tmp_path):
    browser = _browser()
    if browser is None:
        pytest.skip("no chromium browser installed (CI installs Debian's chromium via .ci/run)")
    page = _report_file(tmp_path)
    url = page.resolve().as_uri()
    profile = tempfile.mkdtemp(prefix="cf-chromium-", dir=tmp_path)
    dt = Devtools(browser, profile)
    try:
        targets = dt.send("Target.getTargets")["targetInfos"]
        page_target = next(t for t in targets if t["type"] == "page")
        session = dt.send("Target.attachToTarget", {"targetId": page_target["targetId"],
                                                    "flatten": True})["sessionId"]
        dt.send("Network.enable", session=session)
        dt.send("Page.enable", session=session)
        dt.send("Emulation.setDeviceMetricsOverride",
                {"width": 1280, "height": 900, "deviceScaleFactor": 1, "mobile": False},
                session=session)
        dt.events.clear()
        dt.send("Page.navigate", {"url": url}, session=session)
        dt.wait_event("Page.loadEventFired")

        images = dt.send("Runtime.evaluate", {
            "expression": "Array.from(document.images).map(i => [i.complete, i.naturalWidth, "
                          "i.naturalHeight])", "returnByValue": True},
            session=session)["result"]["value"]
        assert len(images) >= 2  # learning curve and gap at least
        assert all(c and w > 0 and h > 0 for c, w, h in images), images

        scripts = dt.send("Runtime.evaluate", {"expression": "document.scripts.length",
                                               "returnByValue": True},
                          session=session)["result"]["value"]
        assert scripts == 0

        requested = [ev["params"]["request"]["url"] for ev in dt.events
                     if ev.get("method") == "Network.requestWillBeSent"]
        schemes = {u.split(":", 1)[0] for u in requested}
        assert requested and requested[0] == url
        assert schemes <= {"file", "data"}, requested
        assert not [u for u in requested if u.startswith("file:") and u != url]
        failed = [ev for ev in dt.events if ev.get("method") == "Network.loadingFailed"]
        assert not failed, failed

        height = dt.send("Page.getLayoutMetrics", session=session)["cssContentSize"]["height"]
        shot = dt.send("Page.captureScreenshot", {
            "format": "png", "captureBeyondViewport": True,
            "clip": {"x": 0, "y": 0, "width": 1280, "height": float(height), "scale": 1}},
            session=session)["data"]
    finally:
        dt.close()

    import matplotlib.image as mpimg

    png = base64.b64decode(shot)
    (tmp_path / "screenshot.png").write_bytes(png)
    pixels = mpimg.imread(io.BytesIO(png), format="png")
    assert pixels.shape[1] == 1280 and pixels.shape[0] > 1500
    grey = pixels[..., :3].mean(axis=2)
    # not blank: a real page has text and figures, so the grey levels vary a lot
    assert grey.std() > 0.05
    assert (grey < 0.3).mean() > 0.002   # dark text present
    # every band of the page has something on it (no empty half from a broken layout)
    bands = np.array_split(grey[: int(height)], 6)
    assert all(b.std() > 0.01 for b in bands)


def test_screenshot_flag_renders_offline(tmp_path):
    """The plain ``--screenshot`` path (no protocol) also renders the page offline."""
    browser = _browser()
    if browser is None:
        pytest.skip("no chromium browser installed (CI installs Debian's chromium via .ci/run)")
    from curvefit.report import html as report

    c = Curve.from_table(pd.DataFrame({"size": [20, 20, 40, 40, 80, 80],
                                       "test_error": [.3, .32, .22, .2, .15, .16]}),
                         meta={"label": "one model"})
    page = report.write_report(tmp_path / "r.html", [c])
    shot = tmp_path / "shot.png"
    subprocess.run([browser, *BROWSER_FLAGS, f"--user-data-dir={tmp_path / 'profile'}",
                    "--window-size=1280,1400", f"--screenshot={shot}", page.resolve().as_uri()],
                   capture_output=True, timeout=120, check=False)
    import matplotlib.image as mpimg

    pixels = mpimg.imread(shot)
    assert pixels.shape[1] == 1280
    assert pixels[..., :3].mean(axis=2).std() > 0.05
