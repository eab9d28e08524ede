"""``cubeloupe demo``: the example notebooks on the bundled demo cubes, in JupyterLab.

Usage::

    cubeloupe demo [--dir DIR] [--port PORT] [--no-browser] [--reset]

Copies the example notebooks and the demo cubes into a working folder
(default ``~/cubeloupe-demo``, see `default_workdir`), so the installed files
are never edited, then starts JupyterLab on 127.0.0.1 with the quick-look
notebook open. A file
already in the working folder that differs from the installed one (a notebook
you edited) is kept unless ``--reset`` is given.

Exit status: 0 after JupyterLab was stopped with Ctrl-C; 1 when it could not
start (port taken, working folder not writable, JupyterLab failed).
"""

import argparse
import filecmp
import shutil
import sys
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path

from . import launcher

__all__ = ["register", "run", "prepare_workdir", "default_workdir", "WorkdirReport", "DEFAULT_DIR", "QUICK_LOOK"]

# The working folder's name, in the user's home folder by default.
DEFAULT_DIR = "cubeloupe-demo"
DEFAULT_PORT = 8888
QUICK_LOOK = "quick_look.ipynb"
CUBES_SUBDIR = "demo_cubes"


def register(subparsers):
    """Add the ``demo`` subcommand to an argparse ``subparsers`` object."""
    parser = subparsers.add_parser(
        "demo",
        help="open the example notebooks on the bundled demo cubes in JupyterLab",
        description=(
            "Copy the example notebooks and demo cubes into a working folder and start JupyterLab "
            "on 127.0.0.1 with the quick-look notebook open. The installed files are never changed; "
            "your edits to the copies are kept between runs."
        ),
        epilog="Stop JupyterLab with Ctrl-C. Exit status: 0 after a normal stop, 1 if it could not start.",
    )
    parser.add_argument("--dir", default=None, metavar="DIR", type=Path,
                        help=f"working folder for the copies (default: ~/{DEFAULT_DIR})")
    parser.add_argument("--port", type=int, default=DEFAULT_PORT, metavar="PORT",
                        help=f"port for JupyterLab on 127.0.0.1 (default: {DEFAULT_PORT})")
    parser.add_argument("--no-browser", action="store_true",
                        help="do not open a browser; print the address to open instead")
    parser.add_argument("--reset", action="store_true",
                        help="replace your edited copies with fresh ones from the installation")
    parser.set_defaults(func=run)
    return parser


@dataclass
class WorkdirReport:
    """What `prepare_workdir` did with each file (names relative to the working folder)."""

    folder: Path
    copied: list = field(default_factory=list)
    unchanged: list = field(default_factory=list)
    kept: list = field(default_factory=list)
    replaced: list = field(default_factory=list)


def default_workdir():
    """The working folder used without ``--dir``: ``cubeloupe-demo`` in the user's home folder.

    Not the current folder: the Quick start runs ``cubeloupe demo`` in the
    source checkout, whose tree would then fill with untracked copies. A folder
    in the home folder is the same on every run, so edits to the notebooks are
    found again.
    """
    return Path.home() / DEFAULT_DIR


def _installed_files():
    """(source path, path relative to the working folder) of every file the demo needs."""
    notebooks = resources.files("cubeloupe.example_notebooks")
    cubes = resources.files("cubeloupe.demo_cubes")
    files = [(Path(str(item)), Path(item.name)) for item in notebooks.iterdir() if item.name.endswith(".ipynb")]
    files += [(Path(str(item)), Path(CUBES_SUBDIR) / item.name) for item in cubes.iterdir()
              if item.name.endswith((".fits", ".json"))]
    return sorted(files, key=lambda pair: str(pair[1]))


def prepare_workdir(folder, *, reset=False):
    """Copy the example notebooks and demo cubes into ``folder``.

    Missing files are copied; files equal to the installed ones are left
    alone; files that differ (edited by the user) are kept, or replaced when
    ``reset`` is true. The installed files are only read.

    Parameters
    ----------
    folder : path-like
    reset : bool

    Returns
    -------
    WorkdirReport
    """
    folder = Path(folder).expanduser().resolve()
    report = WorkdirReport(folder)
    for source, relative in _installed_files():
        target = folder / relative
        target.parent.mkdir(parents=True, exist_ok=True)
        if not target.exists():
            shutil.copyfile(source, target)   # contents only: the copy is writable even if the install is not
            report.copied.append(str(relative))
        elif filecmp.cmp(source, target, shallow=False):
            report.unchanged.append(str(relative))
        elif reset:
            shutil.copyfile(source, target)
            report.replaced.append(str(relative))
        else:
            report.kept.append(str(relative))
    return report


def run(args, out=None, err=None):
    """Carry out ``cubeloupe demo`` for parsed ``args``; return the exit status."""
    out = out or sys.stdout
    err = err or sys.stderr
    port = args.port
    if not 1 <= port <= 65535:
        print(f"cubeloupe demo: --port {port} is not a valid port; give a number from 1024 to 65535, "
              f"e.g. --port {DEFAULT_PORT}", file=err)
        return 1
    if not launcher.port_is_free(port):
        print(f"cubeloupe demo: port {port} on {launcher.HOST} is already in use (another "
              f"JupyterLab or server may be running there). Stop that server, or choose another port, "
              f"e.g. --port {launcher.free_port()}", file=err)
        return 1
    folder = default_workdir() if args.dir is None else args.dir
    try:
        report = prepare_workdir(folder, reset=args.reset)
    except OSError as exc:
        print(f"cubeloupe demo: cannot prepare the working folder {folder} ({exc}); choose a "
              "writable folder with --dir", file=err)
        return 1
    if not (report.folder / QUICK_LOOK).is_file():
        print(f"cubeloupe demo: the installation has no {QUICK_LOOK} (package cubeloupe.example_notebooks); "
              "reinstall cubeloupe", file=err)
        return 1
    print(f"cubeloupe demo: working folder {report.folder}", file=out)
    if report.copied:
        print(f"  copied {len(report.copied)} file(s) from the installation", file=out)
    for name in report.replaced:
        print(f"  replaced {name} with a fresh copy (--reset)", file=out)
    for name in report.kept:
        print(f"  kept your edited {name} (run with --reset to replace it with a fresh copy)", file=out)
    out.flush()
    return launcher.run_lab(report.folder, QUICK_LOOK, port, open_browser=not args.no_browser,
                                  out=out, err=err)


if __name__ == "__main__":  # pragma: no cover
    demo_parser = argparse.ArgumentParser(prog="cubeloupe")
    register(demo_parser.add_subparsers(dest="command", required=True))
    parsed = demo_parser.parse_args(["demo", *sys.argv[1:]])
    sys.exit(parsed.func(parsed))
