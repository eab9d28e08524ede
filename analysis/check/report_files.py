"""Where the report goes: the output folder, checked before any cube is read, and files written atomically.

`prepare_output` makes sure the folder is writable and holds no report
(unless ``overwrite=True``); `write_report` writes ``DIR/summary.json`` and
the self-contained ``DIR/report.html``, each through a temporary file
renamed into place, so a report is never half written.

Examples
--------
>>> folder = prepare_output("check-out")  # doctest: +SKIP
>>> result = check_cube(open_cube("cube.fits"))  # doctest: +SKIP
>>> entry = cube_entry(result)  # doctest: +SKIP
>>> summary = summary_dict([entry], z=None)  # doctest: +SKIP
>>> write_report(folder, summary, [cube_section(entry, result)])  # doctest: +SKIP
"""

import json
import os
import tempfile
from pathlib import Path

from ..errors import OutputExistsError, ReportFolderError
from .report_html import cube_section, html_page

__all__ = ["SUMMARY_NAME", "REPORT_NAME", "prepare_output", "write_report", "write_atomically"]

SUMMARY_NAME = "summary.json"
REPORT_NAME = "report.html"


def prepare_output(folder, *, overwrite=False):
    """Make sure the report can be written to ``folder``; create it if needed.

    Parameters
    ----------
    folder : str or os.PathLike
    overwrite : bool
        Allow replacing an existing ``summary.json`` / ``report.html``.

    Returns
    -------
    pathlib.Path

    Raises
    ------
    ReportFolderError
        The folder cannot be created, is a file, or is not writable.
    OutputExistsError
        A report is already there and ``overwrite`` is False.

    Examples
    --------
    >>> prepare_output(tmp_path / "out")  # doctest: +SKIP
    PosixPath('.../out')
    """
    text = os.fspath(folder)
    if "\x00" in str(text):
        raise ReportFolderError(f"the output folder {text!r} contains a NUL character; choose another with --out")
    # Resolved first, so that "a/../../x" does not create an empty "a" on the way (#14).
    folder = Path(text).expanduser().resolve()
    if folder.exists() and not folder.is_dir():
        raise ReportFolderError(f"the output path {folder} is a file, not a folder; pass a folder with --out")
    created = [parent for parent in [folder, *folder.parents] if not parent.exists()]
    try:
        folder.mkdir(parents=True, exist_ok=True)
        # os.access misses read-only mounts and ACLs; creating a file is the real test.
        try:
            with tempfile.NamedTemporaryFile(dir=folder, prefix=".cubeloupe-write-test-"):
                pass
        except OSError as exc:
            raise ReportFolderError(
                f"cannot write to the output folder {folder} ({exc.strerror or exc}); "
                "choose a writable folder with --out"
            ) from None
    except OSError as exc:
        for made in created:  # deepest first: leave no empty folder behind
            try:
                made.rmdir()
            except OSError:
                pass
        if isinstance(exc, ReportFolderError):
            raise
        raise ReportFolderError(
            f"cannot create the output folder {folder} ({exc.strerror or exc}); "
            "choose another folder with --out"
        ) from None
    if not overwrite:
        existing = [name for name in (SUMMARY_NAME, REPORT_NAME) if (folder / name).exists()]
        if existing:
            raise OutputExistsError(
                f"{folder} already holds a report ({', '.join(existing)}); it is kept. "
                "Choose another folder with --out, or replace it with --overwrite"
            )
    return folder



def write_atomically(path, text, overwrite):
    if os.path.lexists(path) and not overwrite:  # a dangling symbolic link is not followed either
        raise OutputExistsError(f"{path} exists and is kept; pass --overwrite to replace it")
    handle = tempfile.NamedTemporaryFile("w", dir=path.parent, prefix=f".{path.name}.", delete=False,
                                         encoding="utf-8")
    try:
        with handle:
            handle.write(text)
            handle.flush()
            os.fsync(handle.fileno())  # on disk before the rename makes it the report
        # NamedTemporaryFile makes private (0600) files; a report gets the usual permissions
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(handle.name, 0o666 & ~umask)
        os.replace(handle.name, path)
    except BaseException:
        Path(handle.name).unlink(missing_ok=True)
        raise


def write_report(folder, summary, sections=None, *, overwrite=False, title=None):
    """Write ``summary.json`` and the self-contained ``report.html`` into ``folder``.

    Parameters
    ----------
    folder : path
        A folder accepted by `prepare_output`.
    summary : dict
        From `summary_dict`.
    sections : sequence of str, optional
        One HTML fragment per entry of ``summary["cubes"]``, made with
        `cube_section` right after each cube was checked (so that a long run
        keeps no maps in memory); made from the summary alone (no figures)
        when not given.
    overwrite : bool
    title : str, optional

    Returns
    -------
    tuple of pathlib.Path
        ``(summary_path, report_path)``.

    Raises
    ------
    OutputExistsError, ReportFolderError
    """
    folder = Path(folder)
    summary_path, report_path = folder / SUMMARY_NAME, folder / REPORT_NAME
    if sections is None:
        sections = [cube_section(entry, None) for entry in summary["cubes"]]
    page = html_page(summary, sections, title=title)
    try:
        write_atomically(summary_path, json.dumps(summary, indent=1, allow_nan=False) + "\n", overwrite)
        write_atomically(report_path, page, overwrite)
    except OutputExistsError:
        raise
    except OSError as exc:
        raise ReportFolderError(f"cannot write the report into {folder} ({exc.strerror or exc}); "
                                "choose a writable folder with --out") from None
    return summary_path, report_path

