"""The demo-style report in headless Chromium: every figure renders, nothing is fetched from
outside the page, no script error or console error occurs; the screenshot is kept.

Chromium is driven through its DevTools protocol (a JSON-over-websocket protocol documented
by the Chromium project) with the ``websockets`` client. The test is skipped when Debian's
``/usr/bin/chromium`` is not installed (``.ci/run`` installs it).
"""

from __future__ import annotations

import base64
import itertools
import json
import os
import pathlib
import shutil
import signal
import subprocess
import time
import urllib.request

import pytest

from pipelines.report.style import without_embedded_pictures
from run_folder_factory import make_run_folder

pytestmark = pytest.mark.browser

CHROMIUM = pathlib.Path("/usr/bin/chromium")
REPO = pathlib.Path(__file__).resolve().parents[1]
ARTIFACT = REPO / "test-artifacts" / "report.png"
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--disable-dev-shm-usage", "--window-size=1280,1800", "--hide-scrollbars",
         "--remote-debugging-address=127.0.0.1", "--remote-debugging-port=0"]

#: evaluated in the page after it loaded: what was drawn and what refers outside the page
PAGE_CHECK = """
(() => {
  const figs = [...document.querySelectorAll('figure.plot')];
  const drawn = figs.map(f => {
    const s = f.querySelector('svg');
    if (!s) return false;
    const r = s.getBoundingClientRect();
    return r.width > 100 && r.height > 50 && s.querySelectorAll('path').length > 10;
  });
  const images = [...document.images].map(i => i.complete && i.naturalWidth > 0);
  const refs = [...document.querySelectorAll('[src],[href]')]
      .map(e => e.getAttribute('src') || e.getAttribute('href'));
  return JSON.stringify({figures: figs.length, drawn: drawn, images: images, refs: refs,
                         title: document.title});
})()
"""


class DevTools:
    """A minimal DevTools protocol client over one page's websocket."""

    def __init__(self, url: str):
        from websockets.sync.client import connect

        self.socket = connect(url, max_size=None, open_timeout=20)
        self.ids = itertools.count(1)
        self.events: list[dict] = []

    def call(self, method: str, timeout: float = 30.0, **params) -> dict:
        ident = next(self.ids)
        self.socket.send(json.dumps({"id": ident, "method": method, "params": params}))
        deadline = time.monotonic() + timeout
        while True:
            message = json.loads(self.socket.recv(timeout=max(0.1, deadline - time.monotonic())))
            if message.get("id") == ident:
                if "error" in message:
                    raise RuntimeError(f"{method}: {message['error']}")
                return message.get("result", {})
            self.events.append(message)

    def wait_for(self, method: str, timeout: float = 30.0) -> dict:
        for event in self.events:
            if event.get("method") == method:
                return event
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            message = json.loads(self.socket.recv(timeout=max(0.1, deadline - time.monotonic())))
            self.events.append(message)
            if message.get("method") == method:
                return message
        raise TimeoutError(method)

    def drain(self, seconds: float) -> None:
        deadline = time.monotonic() + seconds
        while time.monotonic() < deadline:
            try:
                self.events.append(json.loads(self.socket.recv(timeout=0.2)))
            except TimeoutError:
                continue

    def close(self) -> None:
        self.socket.close()


def _page_socket(port: int) -> str:
    opener = urllib.request.build_opener(urllib.request.ProxyHandler({}))
    deadline = time.monotonic() + 20
    while time.monotonic() < deadline:
        with opener.open(f"http://127.0.0.1:{port}/json/list", timeout=5) as response:
            targets = json.loads(response.read())
        pages = [t for t in targets if t.get("type") == "page"]
        if pages:
            return pages[0]["webSocketDebuggerUrl"]
        time.sleep(0.2)
    raise TimeoutError("no page target in headless Chromium")


def _debug_port(profile: pathlib.Path, process: subprocess.Popen) -> int:
    marker = profile / "DevToolsActivePort"
    deadline = time.monotonic() + 30
    while time.monotonic() < deadline:
        if marker.is_file():
            text = marker.read_text().split()
            if text:
                return int(text[0])
        if process.poll() is not None:
            raise RuntimeError(f"chromium exited with {process.returncode}")
        time.sleep(0.1)
    raise TimeoutError("chromium did not open its debugging port")


@pytest.fixture()
def chromium(tmp_path):
    if not CHROMIUM.exists():
        pytest.skip("/usr/bin/chromium is not installed (apt-get install chromium)")
    import websockets.sync.client  # noqa: F401 - declared in the test extra: fail, never skip

    profile = tmp_path / "chromium-profile"
    profile.mkdir()
    process = subprocess.Popen([str(CHROMIUM), *FLAGS, f"--user-data-dir={profile}", "about:blank"],
                               stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                               start_new_session=True)
    try:
        port = _debug_port(profile, process)
        client = DevTools(_page_socket(port))
        yield client
        client.close()
    finally:
        with_group = process.pid
        try:
            os.killpg(with_group, signal.SIGTERM)
            process.wait(timeout=10)
        except (ProcessLookupError, subprocess.TimeoutExpired):
            try:
                os.killpg(with_group, signal.SIGKILL)
            except ProcessLookupError:
                pass


def _check_in_browser(client: DevTools, report: pathlib.Path, artifact: pathlib.Path) -> dict:
    """Load ``report`` and assert what a reader needs; save a screenshot to ``artifact``."""
    for domain in ("Page", "Runtime", "Log", "Network"):
        client.call(f"{domain}.enable")
    client.call("Page.navigate", url=report.resolve().as_uri())
    client.wait_for("Page.loadEventFired")
    client.drain(0.5)
    result = client.call("Runtime.evaluate", expression=PAGE_CHECK, returnByValue=True)
    state = json.loads(result["result"]["value"])
    shot = client.call("Page.captureScreenshot", format="png")
    artifact.parent.mkdir(parents=True, exist_ok=True)
    artifact.write_bytes(base64.b64decode(shot["data"]))
    print(f"\nscreenshot: {artifact}")

    assert state["title"].startswith("downcore run report")
    assert state["figures"] >= 4
    assert all(state["drawn"]), f"figures not drawn: {state['drawn']}"
    assert all(state["images"])
    for ref in state["refs"]:
        assert ref.startswith(("#", "figures/", "data:image/png;base64,")), ref[:80]
    errors = []
    for event in client.events:
        method, params = event.get("method"), event.get("params", {})
        if method == "Runtime.exceptionThrown":
            errors.append(params)
        elif method == "Runtime.consoleAPICalled" and params.get("type") in ("error", "assert"):
            errors.append(params)
        elif method == "Log.entryAdded" and params.get("entry", {}).get("level") == "error":
            errors.append(params)
        elif method == "Network.requestWillBeSent":
            url = params["request"]["url"]
            assert url.startswith(("file:", "data:")), f"the report fetched {url}"
        elif method == "Network.loadingFailed":
            errors.append(params)
    assert not errors, errors
    assert artifact.stat().st_size > 10_000
    return state


def test_report_renders_in_headless_chromium(tmp_path, chromium):
    """Open the report of a synthetic run: >= 4 figures all drawn, no image broken, only
    in-page anchors and relative figure links, no request leaving file:/data:, no uncaught
    exception, no console or browser-log error. Saves test-artifacts/report.png."""
    from pipelines.report import write_run_report

    run = make_run_folder(tmp_path / "run")
    _check_in_browser(chromium, write_run_report(run), ARTIFACT)
    shutil.copy(ARTIFACT, tmp_path / "report.png")


@pytest.mark.slow
def test_demo_report_renders_in_headless_chromium(tmp_path, chromium, request):
    """The same checks on the demo run's report (test-artifacts/demo-report.png).

    Uses the run folder named by ``DOWNCORE_DEMO_RUN`` when set (e.g. the one ``.ci/run``
    made), else runs ``downcore demo`` into a temporary folder."""
    run = os.environ.get("DOWNCORE_DEMO_RUN")
    if run and (pathlib.Path(run) / "report.html").is_file():
        report = pathlib.Path(run) / "report.html"
    else:
        from click.testing import CliRunner

        from pipelines.cli import main

        request.getfixturevalue("prefect_harness")
        out = tmp_path / "demo-run"
        result = CliRunner().invoke(main, ["demo", "--out", str(out), "--quiet"])
        assert (out / "report.html").is_file(), result.output
        report = out / "report.html"
    state = _check_in_browser(chromium, report, ARTIFACT.with_name("demo-report.png"))
    text = without_embedded_pictures(report.read_text(encoding="utf-8"))
    assert "http" not in text and "//" not in text
    assert state["figures"] >= 4
