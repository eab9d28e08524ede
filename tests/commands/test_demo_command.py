"""``cubeloupe demo``: a real JupyterLab on 127.0.0.1 serving a writable copy of the quick-look notebook."""

import json
import os
import queue
import re
import signal
import socket
import subprocess
import sys
import threading
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest

from cubeloupe.analysis.commands import demo_command, launcher

NOTIFICATION = "@jupyterlab/apputils-extension:notification"
URL_PATTERN = re.compile(r"http://127\.0\.0\.1:(\d+)/lab/tree/(\S+)\?token=([0-9a-f]+)")


def demo_process(workdir, *args):
    """Start ``cubeloupe demo`` (through the console script's entry point) in its own process group."""
    command = [sys.executable, "-c", "import sys; from cubeloupe.analysis.commands.cli import main; sys.exit(main())",
               "demo", "--dir", str(workdir), *args]
    return subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            start_new_session=True, cwd=workdir.parent)


def lines_of(stream):
    """A queue that receives the lines of ``stream`` as they are written."""
    lines = queue.Queue()

    def pump():
        for line in stream:
            lines.put(line)
        lines.put(None)

    threading.Thread(target=pump, daemon=True).start()
    return lines


def wait_for_url(lines, timeout):
    deadline = time.monotonic() + timeout
    seen = []
    while time.monotonic() < deadline:
        try:
            line = lines.get(timeout=max(0.1, deadline - time.monotonic()))
        except queue.Empty:
            break
        if line is None:
            break
        seen.append(line)
        match = URL_PATTERN.search(line)
        if match:
            return match, seen
    pytest.fail("cubeloupe demo printed no URL; output was:\n" + "".join(seen))


def get_json(url, token):
    request = urllib.request.Request(url, headers={"Authorization": f"token {token}"})
    with urllib.request.urlopen(request, timeout=10) as response:
        return response.status, json.loads(response.read())


@pytest.mark.slow
def test_demo_serves_the_quick_look_notebook(tmp_path):
    workdir = tmp_path / "my-demo"
    port = launcher.free_port()
    process = demo_process(workdir, "--no-browser", "--port", str(port))
    stdout = lines_of(process.stdout)
    token = None
    try:
        match, _ = wait_for_url(stdout, timeout=180)
        assert int(match.group(1)) == port
        assert match.group(2) == demo_command.QUICK_LOOK
        token = match.group(3)

        # The notebook is served from the working copy, through the contents API.
        status, model = get_json(f"http://127.0.0.1:{port}/api/contents/{demo_command.QUICK_LOOK}", token)
        assert status == 200 and model["type"] == "notebook"
        assert any("open_cube" in "".join(cell["source"]) for cell in model["content"]["cells"])
        assert (workdir / demo_command.QUICK_LOOK).is_file()
        assert (workdir / "demo_cubes" / "disk.fits").is_file()

        # No news or update prompt: the server's default for the notification plugin says so.
        status, plugin = get_json(f"http://127.0.0.1:{port}/lab/api/settings/{NOTIFICATION}", token)
        assert status == 200
        defaults = {key: value.get("default") for key, value in plugin["schema"]["properties"].items()}
        assert defaults["fetchNews"] == "false" and defaults["checkForUpdates"] is False

        # Token on: the same request without it is refused.
        with pytest.raises(urllib.error.HTTPError) as refused:
            urllib.request.urlopen(f"http://127.0.0.1:{port}/api/contents/{demo_command.QUICK_LOOK}", timeout=10)
        assert refused.value.code == 403

        # Ctrl-C stops JupyterLab and the command exits cleanly.
        os.kill(process.pid, signal.SIGINT)
        assert process.wait(timeout=60) == 0
        assert launcher.port_is_free(port)
    finally:
        if process.poll() is None:
            os.killpg(process.pid, signal.SIGKILL)
            process.wait()
        if token and not launcher.port_is_free(port):
            # JupyterLab runs in its own process group; ask it to stop through its API.
            request = urllib.request.Request(f"http://127.0.0.1:{port}/api/shutdown", method="POST",
                                             headers={"Authorization": f"token {token}"})
            try:
                urllib.request.urlopen(request, timeout=10)
            except OSError:
                pass


def test_taken_port_gives_a_clear_message(tmp_path):
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as busy:
        busy.bind(("127.0.0.1", 0))
        busy.listen()
        port = busy.getsockname()[1]
        workdir = tmp_path / "demo"
        process = demo_process(workdir, "--no-browser", "--port", str(port))
        out, err = process.communicate(timeout=60)
    assert process.returncode == 1
    assert f"port {port}" in err and "already in use" in err and "--port" in err
    assert not workdir.exists()  # nothing is copied when JupyterLab cannot start


def test_working_copy_keeps_edits_unless_reset(tmp_path):
    report = demo_command.prepare_workdir(tmp_path)
    assert demo_command.QUICK_LOOK in report.copied
    notebook = tmp_path / demo_command.QUICK_LOOK
    notebook.write_text(notebook.read_text().replace("Quick look", "My quick look"))
    again = demo_command.prepare_workdir(tmp_path)
    assert again.kept == [demo_command.QUICK_LOOK] and not again.copied
    assert "My quick look" in notebook.read_text()
    fresh = demo_command.prepare_workdir(tmp_path, reset=True)
    assert fresh.replaced == [demo_command.QUICK_LOOK]
    assert "My quick look" not in notebook.read_text()
    # The installed notebook was only read.
    installed = Path(str(demo_command.resources.files("cubeloupe.example_notebooks") / demo_command.QUICK_LOOK))
    assert "My quick look" not in installed.read_text()


def test_lab_settings_turn_off_the_news_prompt_and_keep_the_installation_defaults(tmp_path):
    """overrides.json of the demo server: news and update checks off, other installed defaults kept.

    JupyterLab reads default settings from overrides.json in its app settings folder
    (JupyterLab user guide, "Overriding default settings")."""
    installed = tmp_path / "installed"
    installed.mkdir()
    (installed / "overrides.json").write_text(json.dumps({
        "@jupyterlab/apputils-extension:themes": {"theme": "JupyterLab Dark"},
        NOTIFICATION: {"fetchNews": "true", "doNotDisturbMode": True},
    }))
    (installed / "page_config.json").write_text(json.dumps({"disabledExtensions": {"some-extension": True}}))
    folder = launcher.write_lab_settings(tmp_path / "demo" / launcher.SETTINGS_SUBDIR, installed=installed)
    overrides = json.loads((folder / "overrides.json").read_text())
    assert overrides[NOTIFICATION] == {"fetchNews": "false", "checkForUpdates": False, "doNotDisturbMode": True}
    assert overrides["@jupyterlab/apputils-extension:themes"] == {"theme": "JupyterLab Dark"}
    assert json.loads((folder / "page_config.json").read_text()) == {"disabledExtensions": {"some-extension": True}}
    # The installation's files were only read.
    assert json.loads((installed / "overrides.json").read_text())[NOTIFICATION]["fetchNews"] == "true"

    command = launcher.lab_command(tmp_path, demo_command.QUICK_LOOK, 8888, settings_dir=folder)
    assert f"--LabApp.app_settings_dir={folder}" in command
    assert "--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate" in command


def test_default_working_folder_is_outside_the_source_tree(monkeypatch, tmp_path):
    """Without --dir the copies go to ~/cubeloupe-demo, never into the checkout the command runs from."""
    checkout = Path(demo_command.__file__).resolve().parents[2]
    assert not demo_command.default_workdir().resolve().is_relative_to(checkout)
    monkeypatch.setenv("HOME", str(tmp_path))
    assert demo_command.default_workdir() == tmp_path / demo_command.DEFAULT_DIR
