"""read_spectral_axis: spectral CTYPEs, VELREF and rest-frequency keywords as the standards define them.

Sources: the FITS spectral WCS standard (Greisen, Calabretta, Valdes & Allen
2006, A&A 446, 747, "Paper III") for FREQ/VRAD/VOPT/VELO, SPECSYS and RESTFRQ;
the AIPS convention (Greisen 1983, AIPS Memo 27, rev. 1993) for VELO-xxx /
FELO-xxx and VELREF (1 LSR, 2 heliocentric, 3 observer, +256 radio), as
wcslib's spcaips documents and implements it (VELREF 4-7 are AIPS++ additions).
"""

import warnings

import astropy.units as u
import pytest
from astropy.io import fits
from astropy.tests.helper import assert_quantity_allclose

from cubeloupe.analysis import (
    SpectralAxisError,
    UnitMismatchError,
    VelocityConventionWarning,
    read_spectral_axis,
)


def header(ctype, **keys):
    return fits.Header({"CTYPE3": ctype, **keys})


@pytest.mark.parametrize("velref, convention, frame", [
    # AIPS Memo 27: VELREF = frame code, + 256 for the radio convention.
    (1, "optical", "LSRK"),
    (2, "optical", "BARYCENT"),
    (3, "optical", "TOPOCENT"),
    (257, "radio", "LSRK"),
    (258, "radio", "BARYCENT"),
    (259, "radio", "TOPOCENT"),
    (260, "radio", "LSRD"),  # 4 = LSR dynamic (AIPS++ extension, as wcslib reads it)
])
def test_velref_gives_convention_and_frame(velref, convention, frame):
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # a stated convention needs no warning
        reading = read_spectral_axis(header("VELO-XXX", VELREF=velref), 3)
    assert reading.convention == convention
    assert reading.read_as == {"radio": "VRAD", "optical": "VOPT"}[convention]
    assert reading.frame == frame
    assert not reading.assumed
    assert f"VELREF = {velref}" in reading.basis
    assert reading.header_ctype == "VELO-XXX"  # the file's own CTYPE is kept for reports


@pytest.mark.parametrize("suffix, frame", [("LSR", "LSRK"), ("HEL", "BARYCENT"), ("OBS", "TOPOCENT")])
def test_legacy_velo_without_velref_warns_and_assumes_optical(suffix, frame):
    # AIPS Memo 27: without the +256 flag a VELO axis is optical; wcslib reads it so.
    with pytest.warns(VelocityConventionWarning, match="velocity_convention='radio'"):
        reading = read_spectral_axis(header(f"VELO-{suffix}"), 3, source="x.fits")
    assert (reading.convention, reading.read_as, reading.frame) == ("optical", "VOPT", frame)
    assert reading.assumed
    assert "VELREF" in reading.basis and "assumed" in reading.basis


@pytest.mark.parametrize("convention, read_as", [("radio", "VRAD"), ("optical", "VOPT"), ("relativistic", "VELO")])
def test_caller_chooses_the_convention_of_a_legacy_axis(convention, read_as):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        reading = read_spectral_axis(header("VELO-LSR"), 3, velocity_convention=convention)
    assert (reading.convention, reading.read_as, reading.assumed) == (convention, read_as, False)
    assert reading.header_updates["CTYPE3"] == read_as


def test_caller_against_velref_is_followed_with_a_warning():
    with pytest.warns(VelocityConventionWarning, match="VELREF = 257"):
        reading = read_spectral_axis(header("VELO-LSR", VELREF=257), 3, velocity_convention="optical")
    assert reading.read_as == "VOPT"


def test_plain_velocity_type_is_read_like_a_legacy_velo():
    # 'VELOCITY' is not a Paper III type (wcslib does not see it as spectral).
    with pytest.warns(VelocityConventionWarning):
        reading = read_spectral_axis(header("VELOCITY"), 3)
    assert reading.read_as == "VOPT"
    reading = read_spectral_axis(header("VELOCITY", VELREF=257), 3)
    assert reading.read_as == "VRAD"


def test_felo_is_optical_linear_in_frequency():
    # AIPS: FELO = optical velocity sampled linearly in frequency = Paper III 'VOPT-F2W';
    # the +256 flag does not apply to FELO (wcslib spcaips).
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        reading = read_spectral_axis(header("FELO-HEL", VELREF=258), 3)
    assert (reading.read_as, reading.convention, reading.frame) == ("VOPT-F2W", "optical", "BARYCENT")


@pytest.mark.parametrize("ctype, convention", [("VRAD", "radio"), ("VOPT", "optical"), ("VELO", "relativistic"),
                                               ("FREQ", None), ("WAVE", None)])
def test_standard_types_state_their_convention(ctype, convention):
    # Paper III Table 1: VRAD radio, VOPT optical, VELO relativistic (apparent radial velocity).
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        reading = read_spectral_axis(header(ctype, SPECSYS="LSRK"), 3)
    assert (reading.read_as, reading.convention, reading.frame, reading.assumed) == (ctype, convention, "LSRK", False)


def test_standard_type_against_velref_follows_the_ctype():
    with pytest.warns(VelocityConventionWarning, match="standard CTYPE is followed"):
        reading = read_spectral_axis(header("VRAD", VELREF=1), 3)
    assert reading.read_as == "VRAD" and reading.convention == "radio"


def test_override_of_a_standard_type_warns():
    with pytest.warns(VelocityConventionWarning, match="says|asked"):
        reading = read_spectral_axis(header("VOPT"), 3, velocity_convention="radio")
    assert reading.read_as == "VRAD"
    assert "VOPT" in reading.basis


def test_specsys_wins_over_velref_frame():
    reading = read_spectral_axis(header("VELO-HEL", VELREF=258, SPECSYS="LSRK"), 3)
    assert reading.frame == "LSRK"


def test_unknown_convention_is_refused():
    with pytest.raises(SpectralAxisError, match="'radial'"):
        read_spectral_axis(header("VRAD"), 3, velocity_convention="radial")


# Rest frequency: RESTFRQ is the Paper III keyword; RESTFREQ the AIPS spelling, which
# wcslib also accepts (Paper III, Sect. 4).
CO10 = 115.2712018 * u.GHz  # 12CO J=1-0 (CDMS catalogue, from memory)


def test_restfreq_alias():
    reading = read_spectral_axis(header("VRAD", RESTFREQ=CO10.to_value(u.Hz)), 3)
    assert_quantity_allclose(reading.rest_frequency, CO10)
    assert reading.rest_frequency_basis.startswith("RESTFREQ")
    assert reading.header_updates["RESTFRQ"] == pytest.approx(CO10.to_value(u.Hz))


def test_restfrq_preferred_and_zero_means_missing():
    reading = read_spectral_axis(header("VRAD", RESTFRQ=0.0), 3)
    assert reading.rest_frequency is None and reading.rest_frequency_basis == "none"
    reading = read_spectral_axis(header("VRAD", RESTFRQ=1e11, RESTFREQ=2e11), 3)
    assert_quantity_allclose(reading.rest_frequency, 100 * u.GHz)


def test_rest_frequency_argument_supplies_or_replaces():
    reading = read_spectral_axis(header("VOPT"), 3, rest_frequency=110.2013541 * u.GHz)
    assert_quantity_allclose(reading.rest_frequency, 110.2013541 * u.GHz)
    assert reading.rest_frequency_basis == "rest_frequency argument"
    reading = read_spectral_axis(header("VRAD", RESTFREQ=1e11), 3, rest_frequency=CO10)
    assert_quantity_allclose(reading.rest_frequency, CO10)
    assert "replaced" in reading.rest_frequency_basis
    assert reading.header_updates["RESTFREQ"] is None  # the stale alias is dropped from the working copy
    # a wavelength is accepted as the same line (f = c / lambda)
    reading = read_spectral_axis(header("VRAD"), 3, rest_frequency=2.6007576 * u.mm)
    assert_quantity_allclose(reading.rest_frequency, CO10, rtol=1e-6)


def test_rest_frequency_argument_must_be_a_frequency():
    with pytest.raises(UnitMismatchError, match="rest_frequency"):
        read_spectral_axis(header("VRAD"), 3, rest_frequency=3 * u.km / u.s)
