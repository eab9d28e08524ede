"""``cubeloupe check``: the delivery check of one cube or a whole delivery, from the shell.

Usage::

    cubeloupe check CUBE_OR_FOLDER... [--z Z] [--out DIR] [--threshold SNR]
                    [--overwrite] [--quiet]

Every FITS file named, and every FITS file directly inside a named folder, is
checked with `~cubeloupe.analysis.check.check_cube`; other files in a
folder are skipped and listed. The report (``DIR/report.html`` and
``DIR/summary.json``, see `cubeloupe.analysis.check`) is written at
the end and a short table is printed. A cube that cannot be read is reported
with its reason and never stops the others.

Exit status: 0 when every cube was read and checked and the report written;
1 when one or more cubes could not be read or checked (the report is still
written and says why); 2 when the report could not be written (the folder is
not writable, or a report is already there and ``--overwrite`` was not
given: that refusal comes before any cube is read), when nothing was given
to check, on a usage error, or on an option out of range (``--threshold``
must be finite, in (0, 1000]; ``--z`` as `check_redshift` allows); 130 when
stopped with Ctrl-C (nothing is written then).
"""

import argparse
import os
import sys
import warnings
from dataclasses import replace
from pathlib import Path

import astropy.units as u
from tqdm import tqdm

from ..check import (
    check_cube, check_detection_options, cube_entry, cube_section, failure_entry, prepare_output, summary_dict,
    terminal_safe, terminal_table, write_report,
)
from ..cubes import open_cube
from ..errors import CubeloupeError, CubeloupeWarning, OutputExistsError, ParameterError, RedshiftError
from ..spectral import check_redshift

__all__ = ["register", "run", "collect_inputs", "EXIT_OK", "EXIT_CUBE_FAILED", "EXIT_NO_REPORT",
           "EXIT_INTERRUPTED"]

EXIT_OK = 0
EXIT_CUBE_FAILED = 1
EXIT_NO_REPORT = 2
EXIT_INTERRUPTED = 130  # the shell's convention for a run stopped with Ctrl-C (128 + SIGINT)

DEFAULT_OUT = "cubeloupe-check"
_FITS_MAGIC = b"SIMPLE  ="


def register(subparsers):
    """Add the ``check`` subcommand to an argparse ``subparsers`` object."""
    parser = subparsers.add_parser(
        "check",
        help="quick-look report on delivered cubes: header, noise, continuum, lines",
        description=(
            "Check spectral-line FITS cubes right after a delivery: header summary, noise per "
            "channel and across the field (primary-beam-corrected cubes are recognised), leftover "
            "continuum, lines expected at z and lines detected in emission or absorption. Writes "
            "DIR/report.html and DIR/summary.json and prints a short table."
        ),
        epilog=(
            "Exit status: 0 every cube checked; 1 some cube could not be read (see the table "
            "and summary.json); 2 no report written (output folder problem) or nothing to check."
        ),
    )
    parser.add_argument("inputs", nargs="+", metavar="CUBE_OR_FOLDER",
                        help="FITS cubes, or folders whose FITS files are all checked")
    parser.add_argument("--z", type=float, default=None, metavar="Z",
                        help="redshift of the source: lists the lines expected in the band and "
                             "identifies detections at that z")
    parser.add_argument("--out", default=DEFAULT_OUT, metavar="DIR",
                        help=f"folder for report.html and summary.json (default: ./{DEFAULT_OUT})")
    parser.add_argument("--threshold", type=float, default=5.0, metavar="SNR",
                        help="smallest detection threshold, in channel rms, for emission and absorption "
                             "(default: 5; raised per cube to keep pure-noise detections rare)")
    parser.add_argument("--rest-frequency", type=float, default=None, metavar="GHZ",
                        help="rest frequency in GHz for cubes whose header lacks one (or to replace it): "
                             "velocity axes then convert to frequency and detections are identified")
    parser.add_argument("--velocity-convention", choices=("radio", "optical", "relativistic"), default=None,
                        help="convention of a velocity axis whose header does not state it (legacy VELO "
                             "without VELREF)")
    parser.add_argument("--overwrite", action="store_true",
                        help="replace a report already in DIR (by default it is kept and nothing is written)")
    parser.add_argument("--quiet", action="store_true",
                        help="no progress bars and no table; print only problems")
    parser.set_defaults(func=run)
    return parser


def collect_inputs(paths):
    """Expand folders into the FITS files they hold.

    A folder contributes every file directly inside it that starts like a
    FITS file (``SIMPLE  =``), whatever its name; anything else in it is
    skipped, with the reason. Paths named one by one are always tried, so a
    missing or broken file there is an error, not a skip.

    Returns
    -------
    cubes : list of pathlib.Path
    skipped : list of (pathlib.Path, str)
    """
    cubes, skipped = [], []
    for raw in paths:
        path = Path(os.fspath(raw)).expanduser()
        if not path.is_dir():
            cubes.append(path)
            continue
        try:
            children = sorted(path.iterdir())
        except OSError as exc:
            skipped.append((path, f"folder cannot be listed ({exc.strerror or exc})"))
            continue
        found = 0
        for child in children:
            if child.is_dir():
                skipped.append((child, "a folder inside a folder (not searched; name it to check it)"))
                continue
            try:
                with open(child, "rb") as handle:
                    head = handle.read(len(_FITS_MAGIC))
            except OSError as exc:
                skipped.append((child, f"cannot be read ({exc.strerror or exc})"))
                continue
            if head != _FITS_MAGIC:
                skipped.append((child, "not a FITS file"))
                continue
            cubes.append(child)
            found += 1
        if not found:
            skipped.append((path, "folder holds no FITS file"))
    return cubes, skipped


def _say(text, *, stream=None):
    print(terminal_safe(text), file=stream or sys.stderr, flush=True)  # file names may hold escape codes (#14)


def _check_one(path, args, position):
    """Check one cube; return (entry, html_section)."""
    bar = tqdm(total=100, desc=terminal_safe(path.name)[:40], unit="%", leave=False,
               disable=True if args.quiet else None,
               position=position, bar_format="{desc}: {percentage:3.0f}%|{bar}| {elapsed}")

    def progress(fraction):
        bar.n = round(100 * min(max(fraction, 0.0), 1.0))
        bar.refresh()

    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            rest = None if args.rest_frequency is None else args.rest_frequency * u.GHz
            cube = open_cube(path, rest_frequency=rest, velocity_convention=args.velocity_convention)
            result = check_cube(cube, z=args.z, threshold=args.threshold, progress=progress)
        notes = list(dict.fromkeys(str(w.message) for w in caught if _worth_reporting(w)))
        if notes:
            result = _with_extra_warnings(result, notes)
        # Listed under the name it was given: a symbolic link keeps its own name, not its target's (#14).
        result = replace(result, path=str(path.absolute()))
        entry = cube_entry(result)
        section = cube_section(entry, result)
    except CubeloupeError as exc:
        entry = failure_entry(path, exc)
        section = cube_section(entry, None)
    except MemoryError:
        entry = failure_entry(path, MemoryError(
            f"ran out of memory checking {path}; close other programs or check this cube on a larger machine"))
        section = cube_section(entry, None)
    except Exception as exc:  # a bug must not stop the other cubes of the delivery
        error = RuntimeError(f"unexpected error while checking {path}: {type(exc).__name__}: {exc}. "
                             "This is a bug in cubeloupe; please report it with the file's header")
        entry = failure_entry(path, error)
        section = cube_section(entry, None)
    finally:
        bar.close()
    return entry, section


def _worth_reporting(caught):
    return issubclass(caught.category, CubeloupeWarning)


def _with_extra_warnings(result, notes):
    return replace(result, warnings=tuple(dict.fromkeys([*result.warnings, *notes])))


def run(args):
    """Run ``cubeloupe check`` with parsed arguments; return the exit status."""
    if args.z is not None:
        try:
            check_redshift(args.z, argname="--z")
        except RedshiftError as exc:
            _say(f"cubeloupe check: {exc}")
            return EXIT_NO_REPORT
    try:
        check_detection_options(args.threshold, argname="--threshold")
    except ParameterError as exc:
        _say(f"cubeloupe check: {exc}")
        return EXIT_NO_REPORT

    output_problem = None
    folder_existed = os.path.lexists(Path(args.out).expanduser()) if "\x00" not in args.out else True
    try:
        folder = prepare_output(args.out, overwrite=args.overwrite)
    except OutputExistsError as exc:
        # Decided before any cube is read: the run could not write its report (#14).
        _say(f"cubeloupe check: no report will be written: {exc}; nothing was checked")
        return EXIT_NO_REPORT
    except CubeloupeError as exc:
        output_problem = str(exc)
        # Said at once so that a long run can be stopped; the cubes are still
        # checked so that the table below shows what was found.
        _say(f"cubeloupe check: no report will be written: {output_problem}")

    cubes, skipped = collect_inputs(args.inputs)
    for path, reason in skipped:
        _say(f"cubeloupe check: skipping {path}: {reason}")
    if not cubes:
        _say("cubeloupe check: nothing to check: no FITS file among the inputs")
        return EXIT_NO_REPORT

    entries, sections = [], []
    outer = tqdm(cubes, desc="cubes", unit="cube", disable=True if (args.quiet or len(cubes) < 2) else None)
    try:
        for path in outer:
            entry, section = _check_one(path, args, position=1 if len(cubes) > 1 else 0)
            entries.append(entry)
            sections.append(section)
            if not entry["ok"]:
                tqdm.write(terminal_safe(f"cubeloupe check: {path}: {entry['error']}"), file=sys.stderr)
    except KeyboardInterrupt:
        outer.close()
        if output_problem is None and not folder_existed:
            try:
                folder.rmdir()  # made for this run and still empty
            except OSError:
                pass
        _say(f"cubeloupe check: interrupted after {len(entries)} of {len(cubes)} cube(s); no report written")
        return EXIT_INTERRUPTED
    outer.close()

    summary = summary_dict(entries, z=args.z, threshold=args.threshold, skipped=skipped)
    if not args.quiet:
        print(terminal_table(summary), flush=True)  # terminal_table escapes control characters itself
    if output_problem is None:
        try:
            summary_path, report_path = write_report(folder, summary, sections,
                                                                  overwrite=args.overwrite)
        except CubeloupeError as exc:
            output_problem = str(exc)
        else:
            if not args.quiet:
                print(f"report: {terminal_safe(report_path)}\nsummary: {terminal_safe(summary_path)}", flush=True)
    failed = [e for e in entries if not e["ok"]]
    for entry in failed:
        _say(f"cubeloupe check: not checked: {entry['path']}: {entry['error']}")
    if output_problem is not None:
        _say(f"cubeloupe check: no report written: {output_problem}")
        return EXIT_NO_REPORT
    return EXIT_CUBE_FAILED if failed else EXIT_OK


def main(argv=None):
    """Run ``check`` on its own (``python -m cubeloupe.analysis.commands.check_command``)."""
    parser = argparse.ArgumentParser(prog="cubeloupe")
    register(parser.add_subparsers(dest="command", required=True))
    args = parser.parse_args(["check", *(sys.argv[1:] if argv is None else argv)])
    return args.func(args)


if __name__ == "__main__":
    sys.exit(main())
