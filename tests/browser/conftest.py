"""Fixtures for the browser suite: a real JupyterLab server and headless Chromium.

The suite runs the notebooks as a user would: a JupyterLab server on 127.0.0.1 (random free
port, random token) serves a temporary copy of ``example_notebooks/`` and ``demo_cubes/``;
Playwright drives the system Chromium against it.

Without Chromium (or without the ``playwright`` package) the tests skip with the reason;
with ``CUBELOUPE_REQUIRE_BROWSER=1`` (set by ``.ci/run``) the same situation is a failure.
Never run ``playwright install``: the project uses the distribution's Chromium package.
"""

import json
import os
import secrets
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest

from lab import LabPage

REPO = Path(__file__).resolve().parents[2]
# Each run writes its step screenshots here (ignored by git). The pictures the
# README shows live in screenshots/ and are refreshed on purpose with
# CUBELOUPE_SCREENSHOT_DIR=tests/browser/screenshots.
SCREENSHOT_DIR = Path(__file__).resolve().parent / "screenshots-latest"
# Folders of the repository copied into the server's root, keeping their names so that
# relative paths between notebooks and cubes work as in a checkout.
SERVED_FOLDERS = ("example_notebooks", "demo_cubes")
CHROMIUM_CANDIDATES = ("chromium", "chromium-browser", "google-chrome", "google-chrome-stable")
SERVER_START_TIMEOUT = 90  # seconds; a cold start on a busy 2-core machine takes ~5-15 s
VIEWPORT = {"width": 1280, "height": 800}
CHROMIUM_ARGS = [
    "--no-sandbox",  # CI runs as root, where Chromium's sandbox cannot start
    "--headless",
    "--disable-gpu",
    # No GPU in CI: WebGL (bqplot-image-gl) runs on the SwiftShader software rasteriser,
    # which recent Chromium only uses when asked to.
    "--enable-unsafe-swiftshader",
    "--use-angle=swiftshader",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--no-first-run",
    "--disable-quic",
    "--disable-dev-shm-usage",  # containers often have a tiny /dev/shm
]

# Server extensions the suite does not use; leaving them out makes the start quicker.
SERVER_CONFIG = {
    "ServerApp": {"jpserver_extensions": {"jupyter_server_terminals": False}}
}

# JupyterLab settings for a quiet, deterministic session (written to overrides.json).
LAB_SETTINGS = {
    # Never ask about (or fetch) the Jupyter news feed or new versions.
    "@jupyterlab/apputils-extension:notification": {
        "fetchNews": "false",
        "checkForUpdates": False,
    },
    "@jupyterlab/notebook-extension:tracker": {
        # Attach every cell to the DOM so that outputs below the fold render too.
        "windowingMode": "none",
        # A notebook without kernel metadata starts the default kernel instead of asking.
        "autoStartDefaultKernel": True,
    },
    # No "file changed on disk" or save dialogs while the kernel and the UI both run.
    "@jupyterlab/docmanager-extension:plugin": {"autosave": False},
    "@jupyterlab/extensionmanager-extension:plugin": {"enabled": False},
}


def _require_browser():
    return os.environ.get("CUBELOUPE_REQUIRE_BROWSER", "") not in ("", "0")


def _skip_or_fail(reason):
    if _require_browser():
        pytest.fail(f"{reason} (CUBELOUPE_REQUIRE_BROWSER=1 makes this a failure)", pytrace=False)
    pytest.skip(reason)


def find_chromium():
    """Path of a Chromium executable: $CUBELOUPE_CHROMIUM, then the usual names on PATH."""
    explicit = os.environ.get("CUBELOUPE_CHROMIUM")
    if explicit:
        return explicit if os.access(explicit, os.X_OK) else None
    for name in CHROMIUM_CANDIDATES:
        found = shutil.which(name)
        if found:
            return found
    return None


def _free_port():
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def _status_ok(base_url, token):
    request = urllib.request.Request(
        f"{base_url}/api/status", headers={"Authorization": f"token {token}"}
    )
    try:
        with urllib.request.urlopen(request, timeout=2) as response:
            return response.status == 200
    except (urllib.error.URLError, ConnectionError, TimeoutError):
        return False


def _process_table():
    """{pid: (parent pid, start time)} of every process, read from /proc (Linux)."""
    table = {}
    for stat in Path("/proc").glob("[0-9]*/stat"):
        try:
            fields = stat.read_text().rsplit(")", 1)[1].split()
        except OSError:
            continue
        # After the command name: field 4 of stat is the parent pid, field 22 the start time.
        table[int(stat.parent.name)] = (int(fields[1]), fields[19])
    return table


def _descendants(pid):
    """[(pid, start time)] of the processes started, directly or not, by ``pid``."""
    table = _process_table()
    found, frontier = [], [pid]
    while frontier:
        parent = frontier.pop()
        for child, (ppid, started) in table.items():
            if ppid == parent:
                found.append((child, started))
                frontier.append(child)
    return found


def _end_leftovers(processes):
    """SIGKILL the given (pid, start time) processes that still run (same pid *and* start time)."""
    table = _process_table()
    for pid, started in processes:
        if pid in table and table[pid][1] == started:
            try:
                os.kill(pid, signal.SIGKILL)
            except ProcessLookupError:
                pass


class LabServer:
    """A JupyterLab server process serving ``root``; use :meth:`start` and :meth:`stop`."""

    def __init__(self, root, workdir):
        self.root = Path(root)
        self.workdir = Path(workdir)
        self.token = secrets.token_hex(24)
        self.port = None
        self.process = None
        self.log_path = self.workdir / "jupyterlab.log"

    @property
    def base_url(self):
        return f"http://127.0.0.1:{self.port}"

    def _command(self):
        settings = self.workdir / "lab-settings"
        return [
            sys.executable, "-m", "jupyterlab",
            "--no-browser",
            "--ServerApp.ip=127.0.0.1",
            f"--ServerApp.port={self.port}",
            "--ServerApp.port_retries=0",
            f"--IdentityProvider.token={self.token}",
            f"--ServerApp.root_dir={self.root}",
            f"--LabApp.app_settings_dir={settings}",
            f"--LabApp.user_settings_dir={self.workdir / 'user-settings'}",
            f"--LabApp.workspaces_dir={self.workdir / 'workspaces'}",
            "--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate",
            "--LabApp.extension_manager=readonly",
        ] + (["--allow-root"] if hasattr(os, "geteuid") and os.geteuid() == 0 else [])

    def _environment(self):
        env = dict(os.environ)
        # Keep the user's own Jupyter/IPython configuration out of the run.
        env["JUPYTER_CONFIG_DIR"] = str(self.workdir / "jupyter-config")
        env["JUPYTER_RUNTIME_DIR"] = str(self.workdir / "jupyter-runtime")
        env["IPYTHONDIR"] = str(self.workdir / "ipython")
        env["PYTHONUNBUFFERED"] = "1"
        env.pop("JUPYTER_TOKEN", None)
        return env

    def start(self, attempts=3):
        settings = self.workdir / "lab-settings"
        settings.mkdir(parents=True, exist_ok=True)
        (settings / "overrides.json").write_text(json.dumps(LAB_SETTINGS, indent=2))
        config = self.workdir / "jupyter-config"
        config.mkdir(parents=True, exist_ok=True)
        (config / "jupyter_server_config.json").write_text(json.dumps(SERVER_CONFIG, indent=2))
        for _ in range(attempts):
            # The port is free when chosen but may be taken before the server binds it
            # (port_retries=0 makes the server exit then); try again with another one.
            self.port = _free_port()
            if self._launch():
                return self
        raise RuntimeError(
            f"JupyterLab did not start after {attempts} attempts; log:\n{self.log_tail()}"
        )

    def _launch(self):
        with open(self.log_path, "ab") as log:  # the child keeps its own copy of the descriptor
            self.process = subprocess.Popen(
                self._command(),
                cwd=self.root,
                env=self._environment(),
                stdin=subprocess.DEVNULL,
                stdout=log,
                stderr=subprocess.STDOUT,
                start_new_session=True,  # a process group of its own, apart from pytest's signals
            )
        deadline = time.monotonic() + SERVER_START_TIMEOUT
        while time.monotonic() < deadline:
            if self.process.poll() is not None:
                self.process = None
                if "already in use" in self.log_tail(5) or "not available" in self.log_tail(5):
                    return False
                raise RuntimeError(f"JupyterLab exited at start; log:\n{self.log_tail()}")
            if _status_ok(self.base_url, self.token):
                return True
            time.sleep(0.2)  # polling interval of a condition, not a wait for time to pass
        self.stop()
        raise RuntimeError(
            f"JupyterLab did not answer /api/status within {SERVER_START_TIMEOUT} s; "
            f"log:\n{self.log_tail()}"
        )

    def log_tail(self, lines=60):
        try:
            text = self.log_path.read_text(errors="replace")
        except FileNotFoundError:
            return "(no log)"
        return "\n".join(text.splitlines()[-lines:])

    def stop(self):
        process, self.process = self.process, None
        if process is None or process.poll() is not None:
            return
        # Kernels run in sessions of their own; note them now to end any that outlive the server.
        children = _descendants(process.pid)
        # Ask politely first (the server then shuts its kernels down), then insist.
        request = urllib.request.Request(
            f"{self.base_url}/api/shutdown",
            method="POST",
            headers={"Authorization": f"token {self.token}"},
        )
        try:
            urllib.request.urlopen(request, timeout=5).close()
        except (urllib.error.URLError, ConnectionError, TimeoutError):
            pass
        for sig in (None, signal.SIGTERM, signal.SIGKILL):
            if sig is not None:
                try:
                    os.killpg(process.pid, sig)
                except ProcessLookupError:
                    break
            try:
                process.wait(timeout=10)
                break
            except subprocess.TimeoutExpired:
                continue
        _end_leftovers(children)


@pytest.fixture(scope="session")
def chromium_path():
    path = find_chromium()
    if path is None:
        _skip_or_fail(
            "no Chromium found (looked for $CUBELOUPE_CHROMIUM and "
            f"{', '.join(CHROMIUM_CANDIDATES)} on PATH); install the distribution's "
            "'chromium' package to run the browser tests"
        )
    return path


@pytest.fixture(scope="session")
def playwright_instance(chromium_path):
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        _skip_or_fail("the 'playwright' package is not installed; pip install -e '.[test]'")
    manager = sync_playwright()
    playwright = manager.start()
    yield playwright
    manager.__exit__(None, None, None)


@pytest.fixture(scope="session")
def browser(playwright_instance, chromium_path):
    browser = playwright_instance.chromium.launch(
        executable_path=chromium_path, headless=True, args=CHROMIUM_ARGS
    )
    yield browser
    browser.close()


@pytest.fixture(scope="session")
def lab_root(tmp_path_factory):
    """Temporary copy of the notebooks and cubes: the server's root directory."""
    root = tmp_path_factory.mktemp("lab-root")
    for name in SERVED_FOLDERS:
        source = REPO / name
        if source.is_dir():
            shutil.copytree(
                source, root / name, ignore=shutil.ignore_patterns("__pycache__", "*.pyc")
            )
    return root


@pytest.fixture(scope="session")
def lab_server(chromium_path, lab_root, tmp_path_factory):
    """A running JupyterLab server; stopped at the end of the session, also on failure."""
    server = LabServer(lab_root, tmp_path_factory.mktemp("lab-state"))
    try:
        server.start()
        yield server
    finally:
        server.stop()


@pytest.fixture(scope="session")
def screenshot_dir():
    directory = Path(os.environ.get("CUBELOUPE_SCREENSHOT_DIR", SCREENSHOT_DIR))
    directory.mkdir(parents=True, exist_ok=True)
    return directory


def _new_lab_page(browser, lab_server, screenshot_dir):
    context = browser.new_context(viewport=VIEWPORT, device_scale_factor=1)
    page = context.new_page()
    lab = LabPage(page, lab_server.base_url, lab_server.token, screenshot_dir)
    return context, lab


@pytest.fixture(scope="module")
def lab_page(browser, lab_server, screenshot_dir):
    """A fresh browser context and JupyterLab page for one test module.

    ``lab_page.console_errors`` collects the console's errors and uncaught exceptions.
    """
    context, lab = _new_lab_page(browser, lab_server, screenshot_dir)
    try:
        yield lab
    finally:
        context.close()


@pytest.fixture(scope="module")
def other_lab_page(browser, lab_server, screenshot_dir):
    """A second page in a browser context of its own, for a module that also works on another
    notebook: its console errors and kernel stay apart from those of ``lab_page``."""
    context, lab = _new_lab_page(browser, lab_server, screenshot_dir)
    try:
        yield lab
    finally:
        context.close()


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_makereport(item, call):
    """On a failure, attach what the page showed: a screenshot path and the console errors."""
    outcome = yield
    report = outcome.get_result()
    funcargs = getattr(item, "funcargs", {})
    pages = [(name, funcargs[name]) for name in ("lab_page", "other_lab_page") if name in funcargs]
    if report.when != "call" or not report.failed or not pages:
        return
    directory = Path(tempfile.gettempdir()) / "cubeloupe-browser-failures"
    directory.mkdir(exist_ok=True)
    from playwright.sync_api import Error as PlaywrightError

    for name, lab in pages:
        path = directory / f"{item.name}{'' if name == 'lab_page' else '-' + name}.png"
        try:
            lab.page.screenshot(path=str(path))
            where = str(path)
        except PlaywrightError as error:  # the page may be gone; the report matters more than the picture
            where = f"(no screenshot: {error})"
        report.sections.append((f"browser ({name})",
                                f"screenshot: {where}\nconsole errors: {lab.console_errors}"))
