"""Run JupyterLab for ``cubeloupe demo``: local only, token on, stopped cleanly on Ctrl-C.

JupyterLab runs as a child process (``python -m jupyterlab``) bound to
127.0.0.1. The launcher makes the access token itself and hands it over in the
``JUPYTER_TOKEN`` environment variable (readable only by the same user, unlike
a command-line option), so it can print the full URL once the server answers.
The child gets a process group of its own: Ctrl-C reaches only the launcher,
which then asks JupyterLab to stop with SIGTERM (its graceful shutdown, which
also stops the kernels) instead of triggering JupyterLab's interactive
"Shutdown this server?" prompt.

The server reads its default settings from a folder of its own inside the
working folder (``.cubeloupe-lab-settings/overrides.json``, hidden from the
file browser), seeded with the installation's defaults: JupyterLab's news and
update prompt is turned off there, so no notification covers the suite (#17).
The user's own JupyterLab settings still apply on top of these defaults.

Examples
--------
>>> port_is_free(free_port())
True
"""

import errno
import json
import os
import secrets
import signal
import socket
import subprocess
import sys
import threading
import time
import urllib.error
import urllib.parse
import urllib.request
from pathlib import Path

__all__ = ["HOST", "LAB_SETTINGS", "SETTINGS_SUBDIR", "port_is_free", "free_port", "lab_command", "lab_url",
           "run_lab", "write_lab_settings"]

HOST = "127.0.0.1"
#: Default settings of the demo's JupyterLab (plugin id -> settings), written to its overrides.json:
#: never ask about (or fetch) the Jupyter news feed, never check for new versions.
LAB_SETTINGS = {
    "@jupyterlab/apputils-extension:notification": {"fetchNews": "false", "checkForUpdates": False},
}
#: The demo server's own app settings folder, inside the working folder (hidden: its name starts with ".").
SETTINGS_SUBDIR = ".cubeloupe-lab-settings"
OVERRIDES = "overrides.json"
READY_POLL_SECONDS = 0.25
STOP_GRACE_SECONDS = 20.0


def port_is_free(port, host=HOST):
    """True if a server could listen on ``host:port`` now.

    Binds with SO_REUSEADDR, as JupyterLab's web server (tornado) does, so a
    port held only by closed connections (TIME_WAIT) counts as free while a
    port with a listening server does not.
    """
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        if os.name != "nt":  # on Windows SO_REUSEADDR would let two servers share a port
            sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        try:
            sock.bind((host, port))
        except OSError as exc:
            if exc.errno in (errno.EADDRINUSE, errno.EACCES, getattr(errno, "WSAEADDRINUSE", -1)):
                return False
            raise
    return True


def free_port(host=HOST):
    """A port on ``host`` that is free at the moment of asking."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind((host, 0))
        return sock.getsockname()[1]


def lab_url(port, notebook, token=None, host=HOST):
    """The JupyterLab URL that opens ``notebook`` (a path relative to the server's root)."""
    path = "/lab/tree/" + urllib.parse.quote(str(notebook).replace(os.sep, "/"))
    query = f"?token={token}" if token else ""
    return f"http://{host}:{port}{path}{query}"


def _installed_settings_dir():
    """JupyterLab's own app settings folder (where an installation keeps overrides.json), or None."""
    try:
        from jupyterlab.commands import get_app_dir   # heavy: only when a server is about to start
    except ImportError:
        return None
    return Path(get_app_dir()) / "settings"


def write_lab_settings(folder, installed=None):
    """Write the demo server's app settings folder: the installation's files plus `LAB_SETTINGS`.

    JupyterLab takes default settings from ``overrides.json`` in its app settings
    folder; the demo server is pointed at ``folder`` instead (`lab_command`). The
    installation's ``overrides.json`` and ``page_config.json``, if any, are
    copied in first, so other extensions' defaults are kept; `LAB_SETTINGS` is
    merged over them. Rewritten on every start.

    Parameters
    ----------
    folder : path-like
        The settings folder to write (created if missing).
    installed : path-like, optional
        The installation's app settings folder (default: JupyterLab's).

    Returns
    -------
    pathlib.Path
        ``folder``.
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    installed = _installed_settings_dir() if installed is None else Path(installed)
    overrides = {}
    if installed is not None:
        for name in ("page_config.json", OVERRIDES):
            source = installed / name
            if not source.is_file():
                continue
            try:
                content = json.loads(source.read_text(encoding="utf-8"))
            except (OSError, ValueError):
                continue          # an unreadable file of the installation: start from nothing
            if name == OVERRIDES:
                overrides = content if isinstance(content, dict) else {}
            else:
                (folder / name).write_text(json.dumps(content, indent=2), encoding="utf-8")
    for plugin, values in LAB_SETTINGS.items():
        merged = overrides.get(plugin)
        overrides[plugin] = {**(merged if isinstance(merged, dict) else {}), **values}
    (folder / OVERRIDES).write_text(json.dumps(overrides, indent=2) + "\n", encoding="utf-8")
    return folder


def lab_command(root_dir, notebook, port, *, open_browser=True, host=HOST, settings_dir=None):
    """The command line that starts JupyterLab on ``host:port`` serving ``root_dir``.

    ``settings_dir``, when given, is the app settings folder the server reads its
    default settings from (see `write_lab_settings`).
    """
    command = [
        sys.executable, "-m", "jupyterlab", str(notebook),
        f"--ServerApp.ip={host}",
        f"--ServerApp.port={port}",
        "--ServerApp.port_retries=0",
        f"--ServerApp.root_dir={root_dir}",
        f"--ServerApp.open_browser={open_browser}",
        "--ServerApp.log_level=WARN",
        # No server-side "a new version is available" notice either.
        "--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate",
    ]
    if settings_dir is not None:
        command.append(f"--LabApp.app_settings_dir={settings_dir}")
    if hasattr(os, "geteuid") and os.geteuid() == 0:
        # JupyterLab refuses to run as root unless told; containers commonly run as root.
        command.append("--ServerApp.allow_root=True")
    return command


def _answers(port, token, host=HOST):
    """The server's status code for an authenticated API request, or None if it does not answer."""
    request = urllib.request.Request(f"http://{host}:{port}/api/status",
                                     headers={"Authorization": f"token {token}"})
    try:
        with urllib.request.urlopen(request, timeout=2) as response:
            return response.status
    except urllib.error.HTTPError as exc:
        return exc.code
    except (urllib.error.URLError, ConnectionError, TimeoutError, OSError):
        return None


def _stop(process):
    """Ask JupyterLab to shut down (SIGTERM), and kill it if it has not stopped in time."""
    if process.poll() is not None:
        return
    process.terminate()
    try:
        process.wait(timeout=STOP_GRACE_SECONDS)
    except subprocess.TimeoutExpired:
        process.kill()
        process.wait()


def _interrupt(signum, frame):
    raise KeyboardInterrupt


def run_lab(root_dir, notebook, port, *, open_browser=True, ready_timeout=120.0, out=None, err=None):
    """Start JupyterLab, print its URL once it answers, and wait until Ctrl-C or SIGTERM.

    Parameters
    ----------
    root_dir : path-like
        The folder JupyterLab serves (the demo's working copy).
    notebook : str
        Notebook to open, relative to ``root_dir``.
    port : int
        Port on 127.0.0.1; the caller has checked it is free.
    open_browser : bool
        Let JupyterLab open the notebook in the default browser.
    ready_timeout : float
        Seconds to wait for the server to answer before giving up.
    out, err : file-like
        Where messages go (default: sys.stdout, sys.stderr).

    Returns
    -------
    status : int
        0 after a normal stop; JupyterLab's exit status if it stopped on its
        own with an error; 1 if it never answered.
    """
    out = out or sys.stdout
    err = err or sys.stderr
    token = secrets.token_hex(24)
    env = dict(os.environ, JUPYTER_TOKEN=token)
    env.pop("JUPYTER_TOKEN_FILE", None)
    popen_kw = {}
    if os.name == "nt":
        popen_kw["creationflags"] = subprocess.CREATE_NEW_PROCESS_GROUP
    else:
        popen_kw["start_new_session"] = True
    settings_dir = write_lab_settings(Path(root_dir) / SETTINGS_SUBDIR)
    process = subprocess.Popen(lab_command(root_dir, notebook, port, open_browser=open_browser,
                                           settings_dir=settings_dir),
                               cwd=root_dir, env=env, stdin=subprocess.DEVNULL, **popen_kw)
    in_main_thread = threading.current_thread() is threading.main_thread()
    previous = signal.signal(signal.SIGTERM, _interrupt) if in_main_thread else None
    try:
        deadline = time.monotonic() + ready_timeout
        status = None
        while status is None:
            if process.poll() is not None:
                print(f"cubeloupe demo: JupyterLab stopped before it was ready (exit status "
                      f"{process.returncode}); its messages above say why.", file=err, flush=True)
                return process.returncode or 1
            if time.monotonic() > deadline:
                print(f"cubeloupe demo: JupyterLab did not answer on {HOST}:{port} within "
                      f"{ready_timeout:g} s; stopping it.", file=err, flush=True)
                return 1
            status = _answers(port, token)
            if status is None:
                time.sleep(READY_POLL_SECONDS)
        if status == 200:
            print(f"\nJupyterLab is running. Open this address in a browser:\n\n    "
                  f"{lab_url(port, notebook, token)}\n", file=out, flush=True)
        else:
            # A user's Jupyter configuration can override the token we passed.
            print(f"\nJupyterLab is running at {lab_url(port, notebook)}\n(it did not accept cubeloupe's "
                  "token, probably because of your Jupyter configuration; use the address it printed)\n",
                  file=out, flush=True)
        print("Press Ctrl-C to stop it.", file=out, flush=True)
        process.wait()
        return process.returncode
    except KeyboardInterrupt:
        print("\ncubeloupe demo: stopping JupyterLab ...", file=out, flush=True)
        _stop(process)
        return 0
    finally:
        _stop(process)
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)
