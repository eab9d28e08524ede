"""Run JupyterLab for ``cubeloupe demo``: local only, token on, stopped cleanly on Ctrl-C.

JupyterLab runs as a child process (``python -m jupyterlab``) bound to
127.0.0.1. The launcher makes the access token itself and hands it over in the
``JUPYTER_TOKEN`` environment variable (readable only by the same user, unlike
a command-line option), so it can print the full URL once the server answers.
The child gets a process group of its own: Ctrl-C reaches only the launcher,
which then asks JupyterLab to stop with SIGTERM (its graceful shutdown, which
also stops the kernels) instead of triggering JupyterLab's interactive
"Shutdown this server?" prompt.

Examples
--------
>>> port_is_free(free_port())
True
"""

import errno
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

__all__ = ["HOST", "port_is_free", "free_port", "lab_command", "lab_url", "run_lab"]

HOST = "127.0.0.1"
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


def lab_command(root_dir, notebook, port, *, open_browser=True, host=HOST):
    """The command line that starts JupyterLab on ``host:port`` serving ``root_dir``."""
    command = [
        sys.executable, "-m", "jupyterlab", str(notebook),
        f"--ServerApp.ip={host}",
        f"--ServerApp.port={port}",
        "--ServerApp.port_retries=0",
        f"--ServerApp.root_dir={root_dir}",
        f"--ServerApp.open_browser={open_browser}",
        "--ServerApp.log_level=WARN",
    ]
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
    process = subprocess.Popen(lab_command(root_dir, notebook, port, open_browser=open_browser),
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
