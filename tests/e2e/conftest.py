"""Start `streamlit run dashboard/app.py` on a free loopback port for the e2e session,
drive it with headless Chromium, and stop the server by its PID."""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
CHROMIUM = os.environ.get("CHROMIUM", "/usr/bin/chromium")
CHROME_ARGS = [
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync",
    "--disable-dev-shm-usage",
]  # fmt: skip
TIMEOUT_MS = 30_000  # a cold plotly render on two loaded cores takes 8 to 20 s


def _require_browser() -> None:
    if not Path(CHROMIUM).exists():
        message = (
            f"no browser at {CHROMIUM}: this test waits for chromium (apt-get install chromium)"
        )
        if os.environ.get("CI"):
            pytest.fail(message)  # CI must never skip the browser layer silently
        pytest.skip(message)


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _compile_kernels() -> None:
    """Fill numba's on-disk cache with the kernels the browser tests' runs use, before
    the server starts: on a fresh machine of two slow cores their first compile takes
    longer than a browser wait should (the server then loads them from the cache)."""
    import lumped
    from lumped.simulate import simulate

    system = lumped.load(lumped.demo_path("quarter_car"))
    for stepper in ("rk4", "newmark"):
        run = simulate(system, stepper, 2e-4, 0.01)
        assert run.status == "completed", f"{stepper} on the demo the browser tests run: {run.message}"
        assert lumped.run_figures(system, run), "no figures for the demo run"


@pytest.fixture(scope="session")
def app_url(tmp_path_factory):
    _require_browser()
    _compile_kernels()
    port = _free_port()
    log = open(tmp_path_factory.mktemp("streamlit") / "server.log", "w+")  # noqa: SIM115
    command = [
        sys.executable, "-m", "streamlit", "run", str(ROOT / "dashboard" / "app.py"),
        "--server.headless", "true", "--server.address", "127.0.0.1",
        "--server.port", str(port), "--server.fileWatcherType", "none",
        "--browser.gatherUsageStats", "false",
    ]  # fmt: skip
    proc = subprocess.Popen(
        command, cwd=ROOT, stdout=log, stderr=subprocess.STDOUT, start_new_session=True
    )
    url = f"http://127.0.0.1:{port}/"
    deadline = time.monotonic() + 60
    try:
        while True:
            if proc.poll() is not None:
                log.seek(0)
                pytest.fail(f"streamlit exited with code {proc.returncode}:\n{log.read()}")
            try:
                with urllib.request.urlopen(url + "_stcore/health", timeout=1) as reply:
                    if reply.read() == b"ok":
                        break
            except OSError:
                pass
            if time.monotonic() > deadline:
                pytest.fail("streamlit did not become healthy in 60 s")
            time.sleep(0.2)
        yield url
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGTERM)  # the group this fixture created, by PID
            try:
                proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                os.killpg(proc.pid, signal.SIGKILL)
                proc.wait()
        log.close()


@pytest.fixture(scope="session")
def browser_context():
    _require_browser()
    from playwright.sync_api import expect, sync_playwright

    expect.set_options(timeout=TIMEOUT_MS)
    with sync_playwright() as p:
        context = p.chromium.launch_persistent_context(
            tempfile.mkdtemp(prefix="chromium-profile-"),
            executable_path=CHROMIUM,
            args=CHROME_ARGS,
            headless=True,
            viewport={"width": 1440, "height": 1500},
        )
        context.set_default_timeout(TIMEOUT_MS)
        yield context
        context.close()


def _wait_idle(page) -> None:
    """Wait until the websocket is connected and no script run is going on."""
    from playwright.sync_api import expect

    app = page.get_by_test_id("stApp")
    expect(app).to_have_attribute("data-test-connection-state", "CONNECTED")
    expect(app).to_have_attribute("data-test-script-state", "notRunning")


@pytest.fixture
def wait_idle():
    """Call ``wait_idle(page)`` after a positive change was seen, to let the run finish."""
    return _wait_idle


@pytest.fixture
def page(browser_context, app_url):
    page = browser_context.new_page()
    page.goto(app_url)
    _wait_idle(page)
    page.get_by_test_id("stPlotlyChart").wait_for()  # the heaviest element on the page
    yield page
    page.close()
