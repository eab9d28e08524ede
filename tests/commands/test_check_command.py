"""Tests of the ``cubeloupe check`` command (issue 8): inputs, bad input, exit status, outputs."""

import json
import os
import subprocess
import sys

import numpy as np
import pytest
from astropy.io import fits

from cubefactory import file_digest, line_cube_data, make_header, primary_beam, write_cube
from cubeloupe.analysis.commands.check_command import EXIT_CUBE_FAILED, EXIT_NO_REPORT, EXIT_OK, collect_inputs

# CO J=2-1 at 230.538 GHz (CDMS catalogue, Mueller et al. 2005), the default
# rest frequency of the test factory's axis: a line at z = 0 lies in its band.
CO21 = 230.538e9
SHAPE = (64, 24, 24)


def _run(argv):
    """Run the command in this process, as the console script does; return its exit status."""
    from cubeloupe.analysis.commands.cli import main

    return main(["check", *argv])


def _good_cube(path, rng, *, lines=((CO21 - 20e6, 10e-3, 3e6),), noise=1e-3):
    data = line_cube_data(SHAPE, rng=rng, noise_rms=noise, lines=lines)
    return write_cube(path, data)


def _summary(folder):
    return json.loads((folder / "summary.json").read_text())


def _truncated(path, rng):
    good = _good_cube(path.with_name("full.fits"), rng)
    raw = good.read_bytes()
    path.write_bytes(raw[: len(raw) // 2])
    good.unlink()
    return path


def _no_spectral_axis(path, rng):
    header = make_header(SHAPE)
    header["CTYPE3"] = "STOKES"
    header["CRVAL3"], header["CDELT3"] = 1.0, 1.0
    header.remove("CUNIT3")
    fits.PrimaryHDU(np.asarray(rng.normal(size=SHAPE), ">f4"), header).writeto(path)
    return path


def test_folder_skips_non_fits_files_and_says_so(tmp_path, rng, capsys):
    delivery = tmp_path / "delivery"
    delivery.mkdir()
    _good_cube(delivery / "a.fits", rng)
    _good_cube(delivery / "b_without_suffix", rng)  # FITS is recognised by content, not name
    (delivery / "README.txt").write_text("calibrated line cubes\n")
    (delivery / "weblog.html").write_text("<html></html>")
    out = tmp_path / "out"
    status = _run([str(delivery), "--out", str(out), "--quiet"])
    assert status == EXIT_OK
    summary = _summary(out)
    assert sorted(os.path.basename(c["path"]) for c in summary["cubes"]) == ["a.fits", "b_without_suffix"]
    assert all(c["ok"] for c in summary["cubes"])
    skipped = {os.path.basename(s["path"]): s["reason"] for s in summary["skipped"]}
    assert skipped == {"README.txt": "not a FITS file", "weblog.html": "not a FITS file"}
    err = capsys.readouterr().err
    assert "skipping" in err and "README.txt" in err and "not a FITS file" in err


def test_bad_cubes_are_reported_and_the_others_still_checked(tmp_path, rng, capsys):
    delivery = tmp_path / "delivery"
    delivery.mkdir()
    _truncated(delivery / "1_truncated.fits", rng)
    _no_spectral_axis(delivery / "2_stokes_only.fits", rng)
    good = _good_cube(delivery / "3_good.fits", rng)
    before = file_digest(good)
    out = tmp_path / "out"
    status = _run([str(delivery), "--out", str(out), "--quiet"])
    assert status == EXIT_CUBE_FAILED
    cubes = {os.path.basename(c["path"]): c for c in _summary(out)["cubes"]}
    assert not cubes["1_truncated.fits"]["ok"]
    assert "truncated" in cubes["1_truncated.fits"]["error"]
    assert not cubes["2_stokes_only.fits"]["ok"]
    assert "no spectral axis" in cubes["2_stokes_only.fits"]["error"]
    assert cubes["2_stokes_only.fits"]["error_type"] == "SpectralAxisError"
    assert cubes["3_good.fits"]["ok"] and cubes["3_good.fits"]["error"] is None
    assert cubes["3_good.fits"]["detections"], "the good cube's line must still be found"
    err = capsys.readouterr().err
    assert "1_truncated.fits" in err and "2_stokes_only.fits" in err
    page = (out / "report.html").read_text()
    assert page.count("Not checked:") == 2 and "no spectral axis" in page
    assert file_digest(good) == before, "input cubes are never modified"


def test_missing_file_named_on_the_command_line_is_an_error(tmp_path, rng):
    good = _good_cube(tmp_path / "good.fits", rng)
    out = tmp_path / "out"
    status = _run([str(tmp_path / "nowhere.fits"), str(good), "--out", str(out), "--quiet"])
    assert status == EXIT_CUBE_FAILED
    cubes = _summary(out)["cubes"]
    assert [c["ok"] for c in cubes] == [False, True]
    assert "does not exist" in cubes[0]["error"]


def test_unwritable_output_folder_gives_a_clear_message_and_still_checks(tmp_path, rng, capsys):
    good = _good_cube(tmp_path / "good.fits", rng)
    blocker = tmp_path / "a_file"
    blocker.write_text("not a folder")
    status = _run([str(good), "--out", str(blocker / "report")])
    assert status == EXIT_NO_REPORT
    captured = capsys.readouterr()
    assert "cannot create the output folder" in captured.err and str(blocker / "report") in captured.err
    assert "good.fits" in captured.out, "the cubes are still checked and tabulated"
    assert not (blocker / "report").exists()


@pytest.mark.skipif(os.geteuid() == 0, reason="root writes into read-only folders")
def test_read_only_output_folder(tmp_path, rng, capsys):
    good = _good_cube(tmp_path / "good.fits", rng)
    out = tmp_path / "ro"
    out.mkdir()
    out.chmod(0o500)
    try:
        assert _run([str(good), "--out", str(out), "--quiet"]) == EXIT_NO_REPORT
    finally:
        out.chmod(0o700)
    assert "cannot write to the output folder" in capsys.readouterr().err


def test_existing_report_is_kept_unless_overwrite(tmp_path, rng, capsys):
    good = _good_cube(tmp_path / "good.fits", rng)
    out = tmp_path / "out"
    assert _run([str(good), "--out", str(out), "--quiet"]) == EXIT_OK
    kept = (out / "summary.json").read_bytes(), (out / "report.html").read_bytes()
    assert _run([str(good), "--out", str(out), "--quiet", "--z", "0"]) == EXIT_NO_REPORT
    assert ((out / "summary.json").read_bytes(), (out / "report.html").read_bytes()) == kept
    err = capsys.readouterr().err
    assert "already holds a report" in err and "--overwrite" in err
    assert _run([str(good), "--out", str(out), "--quiet", "--z", "0", "--overwrite"]) == EXIT_OK
    assert _summary(out)["z"] == 0.0


def test_bad_redshift_is_refused_before_any_work(tmp_path, rng, capsys):
    good = _good_cube(tmp_path / "good.fits", rng)
    out = tmp_path / "out"
    assert _run([str(good), "--out", str(out), "--z", "1500"]) == EXIT_NO_REPORT
    assert "--z=1500" in capsys.readouterr().err
    assert not out.exists()


def test_folder_without_fits_files(tmp_path, capsys):
    empty = tmp_path / "empty"
    empty.mkdir()
    (empty / "notes.txt").write_text("nothing here")
    assert _run([str(empty), "--out", str(tmp_path / "out")]) == EXIT_NO_REPORT
    assert "nothing to check" in capsys.readouterr().err


def test_collect_inputs_keeps_named_files_and_expands_folders(tmp_path, rng):
    folder = tmp_path / "f"
    folder.mkdir()
    _good_cube(folder / "x.fits", rng)
    (folder / "sub").mkdir()
    named = tmp_path / "named.txt"
    named.write_text("a named file is always tried")
    cubes, skipped = collect_inputs([folder, named])
    assert cubes == [folder / "x.fits", named]
    assert [(p.name, r.startswith("a folder inside")) for p, r in skipped] == [("sub", True)]


def test_summary_json_schema_and_terminal_table(tmp_path, rng, capsys):
    good = _good_cube(tmp_path / "good.fits", rng)
    out = tmp_path / "out"
    assert _run([str(good), "--out", str(out), "--z", "0"]) == EXIT_OK
    summary = _summary(out)
    # the keys the issue makes a contract, and the documented sections
    assert {"schema", "z", "threshold_snr", "skipped", "cubes"} <= set(summary)
    cube = summary["cubes"][0]
    assert {"path", "ok", "error", "rms", "detections", "header", "noise", "continuum", "lines",
            "strongest", "warnings"} <= set(cube)
    assert set(cube["rms"]) == {"value", "unit"} and cube["rms"]["unit"] == "Jy / beam"
    detection = cube["detections"][0]
    assert {"frequency_ghz", "snr", "candidates", "width_mhz", "width_kms", "channels"} <= set(detection)
    assert detection["candidates"][0]["name"] == "CO J=2-1"
    assert {"blanked_fraction", "band_ghz", "channel_width_mhz", "channel_width_kms", "beam",
            "pixels_per_beam", "pixel_size_arcsec", "axes"} <= set(cube["header"])
    assert len(cube["noise"]["channel_rms"]["value"]) == SHAPE[0]
    page = (out / "report.html").read_text()
    assert page.count("data:image/png;base64,") >= 3, "figures are embedded in the page"
    assert "<script" not in page and "http" not in page.replace("http-equiv", ""), "the page is self-contained"
    table = capsys.readouterr().out
    assert "good.fits" in table and "CO J=2-1" in table


@pytest.mark.slow
def test_console_script_runs_and_returns_the_status(tmp_path, rng):
    delivery = tmp_path / "d"
    delivery.mkdir()
    _good_cube(delivery / "good.fits", rng)
    _truncated(delivery / "bad.fits", rng)
    out = tmp_path / "out"
    done = subprocess.run([sys.executable, "-m", "cubeloupe.analysis.commands.cli", "check", str(delivery),
                           "--out", str(out), "--quiet"], capture_output=True, text=True, timeout=300)
    assert done.returncode == EXIT_CUBE_FAILED, done.stderr
    assert "bad.fits" in done.stderr and "truncated" in done.stderr
    assert "Traceback" not in done.stderr


@pytest.mark.slow
def test_whole_demo_delivery(tmp_path, capsys):
    """The bundled demo folder as a delivery: its FITS cubes checked, its other files skipped."""
    from cubeloupe.analysis.demo import demo_names, demo_path

    folder = demo_path(demo_names()[0]).parent
    before = {name: file_digest(demo_path(name)) for name in demo_names()}
    out = tmp_path / "out"
    assert _run([str(folder), "--out", str(out), "--quiet"]) == EXIT_OK
    summary = _summary(out)
    assert sorted(os.path.basename(c["path"]) for c in summary["cubes"]) == sorted(f"{n}.fits" for n in demo_names())
    assert all(c["ok"] and c["detections"] for c in summary["cubes"])
    skipped = {os.path.basename(s["path"]) for s in summary["skipped"]}
    assert {f"{n}.json" for n in demo_names()} <= skipped and "__init__.py" in skipped
    assert {name: file_digest(demo_path(name)) for name in demo_names()} == before


def test_ctrl_c_stops_cleanly_without_a_report(tmp_path, rng, monkeypatch, capsys):
    from cubeloupe.analysis.commands import check_command

    good = _good_cube(tmp_path / "good.fits", rng)

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(check_command, "_check_one", interrupted)
    out = tmp_path / "out"
    # 128 + SIGINT is the shell's status for a command stopped by Ctrl-C (common practice)
    assert _run([str(good), "--out", str(out)]) == 130
    assert "interrupted" in capsys.readouterr().err
    assert not (out / "summary.json").exists() and not (out / "report.html").exists()


def test_primary_beam_corrected_cube_is_recognised_in_the_summary_and_the_table(tmp_path, rng, capsys):
    """Noise rising to 5 times the centre's at the 20 %-response edge: reported, and no edge noise taken for lines."""
    shape = (80, 64, 64)
    # Gaussian primary beam falling to 0.2 at 32 pixels from the centre; pbcor noise = flat noise / response
    # (common practice), blanked below 0.2
    beam = primary_beam(shape[1:], 32 * np.sqrt(4 * np.log(2) / np.log(5)))
    data = rng.normal(0, 1e-3, shape) / beam
    data[:, beam < 0.2] = np.nan
    cube = write_cube(tmp_path / "pbcor.fits", data)
    out = tmp_path / "out"
    assert _run([str(cube), "--out", str(out)]) == EXIT_OK
    entry = _summary(out)["cubes"][0]
    assert entry["detections"] == []
    spatial = entry["noise"]["spatial"]
    assert spatial["primary_beam_corrected"] and 4.0 < spatial["edge_to_centre"] < 5.5
    assert "centre" in entry["noise"]["rms_region"]
    # the rms is the centre's, the injected 1 mJy/beam
    assert entry["rms"]["value"] == pytest.approx(1e-3, rel=0.1)
    assert "primary-beam corrected" in (out / "report.html").read_text()
    assert "(centre; edge x" in capsys.readouterr().out


REAL = __import__("pathlib").Path(__file__).resolve().parents[2].parent / "shared" / "real-cubes"


@pytest.mark.skipif(not (REAL / "l1448_13co.fits").is_file(), reason=f"real observed cubes not available ({REAL})")
def test_rest_frequency_option_identifies_a_velocity_only_cube(tmp_path):
    """Issue 13: a velocity axis without a rest frequency; --rest-frequency supplies it.

    13CO J=1-0 at 110.20135428 GHz (CDMS catalogue, Mueller et al. 2005, as in the bundled catalog).
    """
    out = tmp_path / "out"
    status = _run([str(REAL / "l1448_13co.fits"), "--out", str(out), "--quiet", "--rest-frequency", "110.20135428"])
    assert status == EXIT_OK
    cube = _summary(out)["cubes"][0]
    assert cube["detections"][0]["candidates"][0]["name"] == "13CO J=1-0"
    assert cube["detections"][0]["frequency_ghz"] == pytest.approx(110.2013 * (1 - 4.3 / 299792.458), abs=5e-4)
