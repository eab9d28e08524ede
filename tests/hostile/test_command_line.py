"""Hostile corpus, the command line (#14): options are validated before any work, a refusal to overwrite comes
before any cube is read, output paths leave nothing stray, and every name reaches the terminal escaped.
The ``sandbox`` fixture checks that no input changed and that only the expected report files exist.
"""

import json
import os

import pytest

from conftest import run_python
from cubeloupe.analysis.commands.check_command import EXIT_CUBE_FAILED, EXIT_NO_REPORT, EXIT_OK


def _run(argv):
    """The command in this process, as the console script runs it; its exit status."""
    from cubeloupe.analysis.commands.cli import main

    return main(["check", *argv])


REPORT = ("report.html", "summary.json")


@pytest.mark.parametrize("value", ["inf", "-inf", "1e300", "nan", "-1", "0", "1001"])
def test_threshold_out_of_range_is_refused_before_any_work(sandbox, capsys, value):
    cube = sandbox.cube()
    out = sandbox.out / "report"
    assert _run([str(cube), "--out", str(out), f"--threshold={value}"]) == EXIT_NO_REPORT
    err = capsys.readouterr().err
    assert "--threshold must be a finite number" in err and f"got {float(value)!r}" in err
    assert not out.exists(), "nothing may be created for a refused option"


@pytest.mark.parametrize("value", ["five", "", "5 sigma"])
def test_threshold_that_is_not_a_number_is_a_usage_error(sandbox, capsys, value):
    cube = sandbox.cube()
    with pytest.raises(SystemExit) as caught:
        _run([str(cube), "--out", str(sandbox.out / "r"), "--threshold", value])
    assert caught.value.code == 2 and "--threshold" in capsys.readouterr().err


@pytest.mark.parametrize("value", ["inf", "nan", "1e300", "-1", "-5"])
def test_redshift_out_of_range_is_refused_before_any_work(sandbox, capsys, value):
    cube = sandbox.cube()
    out = sandbox.out / "report"
    assert _run([str(cube), "--out", str(out), f"--z={value}"]) == EXIT_NO_REPORT
    assert "--z=" in capsys.readouterr().err
    assert not out.exists()


def test_out_with_dot_dots_leaves_no_empty_folder(sandbox, monkeypatch):
    work = sandbox.out / "work"
    work.mkdir()
    (work / "keep").write_text("x")
    cube = sandbox.cube()
    monkeypatch.chdir(work)
    assert _run([str(cube), "--out", "a/../../x", "--quiet"]) == EXIT_OK
    assert not (work / "a").exists(), "the path's 'a' must not be created on the way"
    sandbox.expect("work/keep", *(f"x/{name}" for name in REPORT))


def test_out_inside_an_unwritable_folder_creates_nothing(sandbox):
    cube = sandbox.cube()
    locked = sandbox.out / "locked"
    locked.mkdir()
    os.chown(locked, 65534, 65534) if os.geteuid() == 0 else None
    locked.chmod(0o555)
    sandbox.expect("locked/")
    try:
        result = run_python(f"""
            import sys
            from cubeloupe.analysis.commands.cli import main
            sys.exit(main(["check", {str(cube)!r}, "--out", {str(locked / "deep" / "er")!r}, "--quiet"]))
            """, unprivileged=True)
    finally:
        locked.chmod(0o755)
    assert result.returncode == EXIT_NO_REPORT, result.stderr
    assert "cannot create the output folder" in result.stderr and str(locked) in result.stderr
    assert not os.listdir(locked)


def test_out_that_is_a_file(sandbox, capsys):
    cube = sandbox.cube()
    (sandbox.out / "plain").write_text("x")
    sandbox.expect("plain")
    assert _run([str(cube), "--out", str(sandbox.out / "plain"), "--quiet"]) == EXIT_NO_REPORT
    assert "plain" in capsys.readouterr().err


def test_existing_report_is_refused_before_any_cube_is_read(sandbox, capsys, monkeypatch):
    cube = sandbox.cube()
    out = sandbox.out / "report"
    out.mkdir()
    for name in REPORT:
        (out / name).write_text("earlier report")
    sandbox.expect(*(f"report/{name}" for name in REPORT))
    from cubeloupe.analysis.commands import check_command

    def must_not_run(*args, **kwargs):
        raise AssertionError("a cube was read although the report could not be written")

    monkeypatch.setattr(check_command, "open_cube", must_not_run)
    assert _run([str(cube), "--out", str(out)]) == EXIT_NO_REPORT
    assert "nothing was checked" in capsys.readouterr().err
    assert all((out / name).read_text() == "earlier report" for name in REPORT)


@pytest.mark.parametrize("name", ["esc\x1b[2J\x1b[31m.fits", "line\nbreak.fits", "bell\x07.fits",
                                  "back\rspace.fits", "c1\x9b31m.fits"])
def test_file_names_reach_the_terminal_escaped(sandbox, capsys, name):
    cube = sandbox.cube(name)
    broken = sandbox.raw(name.replace(".fits", "-broken.fits"), b"SIMPLE  = not really")
    status = _run([str(cube), str(broken), "--out", str(sandbox.out / "report")])
    sandbox.expect(*(f"report/{n}" for n in REPORT))
    assert status == EXIT_CUBE_FAILED
    captured = capsys.readouterr()
    shown = ascii(name)[1:-1]  # the Python escape of every control character
    for text in (captured.out, captured.err):
        assert not any(ch in text for ch in "\x1b\x07\r\x9b"), "a control character reached the terminal"
    assert shown in captured.out  # the table names the cube, escaped
    assert ascii(name.replace(".fits", "-broken.fits"))[1:-1] in captured.err  # and the failure says which file


def test_skipped_file_names_are_escaped_too(sandbox, capsys):
    delivery = sandbox.inputs / "delivery"
    delivery.mkdir()
    sandbox.cube("delivery/good.fits")
    (delivery / "notes\x1b[5m.txt").write_text("not a cube")
    sandbox.track(delivery / "notes\x1b[5m.txt")
    assert _run([str(delivery), "--out", str(sandbox.out / "report"), "--quiet"]) == EXIT_OK
    sandbox.expect(*(f"report/{n}" for n in REPORT))
    err = capsys.readouterr().err
    assert "\x1b" not in err and "notes\\x1b[5m.txt" in err


def test_symbolic_links_are_listed_under_their_own_names(sandbox, capsys):
    target = sandbox.cube("archive-name.fits")
    for link in ("band6.fits", "band6-copy.fits"):
        (sandbox.inputs / link).symlink_to(target)
    out = sandbox.out / "report"
    argv = [str(sandbox.inputs / "band6.fits"), str(sandbox.inputs / "band6-copy.fits"), "--out", str(out)]
    assert _run(argv) == EXIT_OK
    sandbox.expect(*(f"report/{n}" for n in REPORT))
    names = [os.path.basename(entry["path"]) for entry in json.loads((out / "summary.json").read_text())["cubes"]]
    assert names == ["band6.fits", "band6-copy.fits"]
    table = capsys.readouterr().out
    assert "band6.fits" in table and "band6-copy.fits" in table and "archive-name.fits" not in table


def test_report_html_escapes_hostile_names(sandbox):
    cube = sandbox.cube("<img src=x onerror=alert(1)>.fits")
    out = sandbox.out / "report"
    assert _run([str(cube), "--out", str(out), "--quiet"]) == EXIT_OK
    sandbox.expect(*(f"report/{n}" for n in REPORT))
    html = (out / "report.html").read_text()
    assert "<img src=x" not in html and "&lt;img src=x onerror=alert(1)&gt;" in html


def test_missing_input_is_a_failed_row_not_a_traceback(sandbox, capsys):
    good = sandbox.cube()
    out = sandbox.out / "report"
    status = _run([str(sandbox.inputs / "nowhere.fits"), str(good), "--out", str(out), "--quiet"])
    sandbox.expect(*(f"report/{n}" for n in REPORT))
    assert status == EXIT_CUBE_FAILED
    entries = json.loads((out / "summary.json").read_text())["cubes"]
    assert [entry["ok"] for entry in entries] == [False, True]
    assert entries[0]["error_type"] == "CubeFileError" and "nowhere.fits" in entries[0]["error"]
    assert "bug in cubeloupe" not in capsys.readouterr().err


def test_unreadable_input_is_not_called_a_bug(sandbox):
    """(D2's reading work: the pre-read sits inside the error handling.)"""
    cube = sandbox.cube("secret.fits")
    cube.chmod(0o000)
    out = sandbox.out / "report"
    try:
        result = run_python(f"""
            import sys
            from cubeloupe.analysis.commands.cli import main
            sys.exit(main(["check", {str(cube)!r}, "--out", {str(out)!r}, "--quiet"]))
            """, unprivileged=True)
    finally:
        cube.chmod(0o644)
    sandbox.expect(*(f"report/{n}" for n in REPORT))
    assert result.returncode == EXIT_CUBE_FAILED, result.stderr
    entry = json.loads((out / "summary.json").read_text())["cubes"][0]
    assert entry["error_type"] == "CubeFileError" and "secret.fits" in entry["error"]
    assert "bug" not in entry["error"] and "permission" in entry["error"].lower()


def test_module_entry_point_refuses_like_the_script(sandbox):
    cube = sandbox.cube()
    result = run_python(f"""
        import sys
        from cubeloupe.analysis.commands.check_command import main
        sys.exit(main([{str(cube)!r}, "--threshold", "inf", "--out", {str(sandbox.out / "r")!r}]))
        """)
    assert result.returncode == EXIT_NO_REPORT and "--threshold" in result.stderr
