"""moment_maps: analytic Gaussian moments, spectral-cube agreement, baselines, noise, NaNs, errors."""

import threading

import astropy.units as u
import numpy as np
import pytest
from numpy.testing import assert_allclose

from cubefactory import C_KMS, file_digest, gaussian_profile, velocity_axis_kms
from cubeloupe.analysis import (
    CancelledComputation,
    CubeloupeError,
    FitError,
    PolarisationError,
    PolarisationWarning,
    SpectralAxisError,
    SpectralRangeError,
    open_cube,
)
from cubeloupe.analysis.moments import MomentMaps, moment_maps

KMS = u.km / u.s
CO21 = 230.538 * u.GHz  # 12CO J=2-1 rest frequency (CDMS catalogue, from memory)
NCHAN = 240
CENTRE = NCHAN / 2 + 0.5  # reference pixel: velocity 0 in the middle of the band
VEL = velocity_axis_kms(NCHAN, crpix3=CENTRE)  # radio velocities of the channels, 1.3 km/s apart
LINE_FREE = [(-150, -70), (70, 150)] * KMS
WINDOW = (-60, 60) * KMS


def gaussian_cube(shape=(NCHAN, 6, 5), amplitude=2.0, v0=5.0, sigma=12.0):
    line = gaussian_profile(VEL, amplitude, v0, sigma)
    return np.broadcast_to(line[:, None, None], shape).astype(float).copy()


@pytest.fixture
def centred_path(cube_path):
    """cube_path with velocity 0 (at CO 2-1) in the middle of the band."""
    def make(data, **kw):
        kw.setdefault("crpix3", CENTRE)
        return cube_path(data, **kw)
    return make


def naive_moments(spectrum, velocity, window, free, order):
    """Per-pixel float64 reference: numpy polyfit baseline on the valid line-free channels, then sums."""
    ok = np.isfinite(spectrum)
    use_free = free & ok
    y = spectrum.copy()
    if order is not None:
        coefficients = np.polynomial.polynomial.polyfit(velocity[use_free], spectrum[use_free], order)
        y = spectrum - np.polynomial.polynomial.polyval(velocity, coefficients)
    win = window & ok
    dv = np.abs(np.gradient(velocity))
    m0 = np.sum(y[win] * dv[win])
    m1 = np.sum(y[win] * dv[win] * velocity[win]) / m0
    m2 = np.sqrt(np.sum(y[win] * dv[win] * (velocity[win] - m1) ** 2) / m0)
    return m0, m1, m2


def test_gaussian_line_gives_analytic_moments(centred_path):
    # Gaussian integral: m0 = A sigma sqrt(2 pi); centroid v0; dispersion sigma (analytic).
    amplitude, v0, sigma = 2.0, 5.0, 12.0
    cube = open_cube(centred_path(gaussian_cube(amplitude=amplitude, v0=v0, sigma=sigma)))
    maps = moment_maps(cube, (-85, 95) * KMS)  # +-7.5 sigma: the truncated wings are < 1e-12 of the flux
    assert isinstance(maps, MomentMaps)
    assert_allclose(maps.m0.value, amplitude * sigma * np.sqrt(2 * np.pi), rtol=1e-4)
    assert_allclose(maps.m1.value, v0, atol=1e-3)
    assert_allclose(maps.m2.value, sigma, rtol=1e-4)
    assert maps.m0.unit == u.Jy / u.beam * KMS
    assert maps.m1.unit == KMS and maps.m2.unit == KMS
    assert maps.rms is None and maps.m0_error is None


@pytest.mark.parametrize("cdelt3", [1300.0, -1300.0])
def test_velocity_axis_in_either_direction(centred_path, cdelt3):
    # VRAD axis ascending or descending: the moments are the same physical numbers (analytic Gaussian).
    velocity = (np.arange(NCHAN) + 1 - CENTRE) * cdelt3 / 1e3
    data = np.broadcast_to(gaussian_profile(velocity, 1.0, -8.0, 10.0)[:, None, None], (NCHAN, 4, 3)).copy()
    cube = open_cube(centred_path(data, spectral="VRAD", crpix3=CENTRE, cdelt3=cdelt3, bunit="K"))
    maps = moment_maps(cube, (-80, 64) * KMS)
    assert_allclose(maps.m0.value, 10.0 * np.sqrt(2 * np.pi), rtol=1e-4)
    assert_allclose(maps.m1.value, -8.0, atol=1e-3)
    assert_allclose(maps.m2.value, 10.0, rtol=1e-4)
    assert maps.m0.unit == u.K * KMS


def test_agrees_with_spectral_cube_moments(centred_path, rng):
    # Reference: spectral-cube's moment0 / moment1 / linewidth_sigma over a spectral_slab of the window.
    data = gaussian_cube(shape=(NCHAN, 7, 6), v0=-4.0) * rng.uniform(0.5, 1.5, (1, 7, 6))
    data += rng.normal(0, 0.05, data.shape)
    data[rng.random(data.shape) < 0.02] = np.nan
    cube = open_cube(centred_path(data))
    slab = cube.with_spectral_unit(KMS, velocity_convention="radio", rest_value=CO21).spectral_slab(*WINDOW)
    # spectral_slab keeps the channels around the edges too: give moment_maps exactly the slab's channels
    half_channel = 0.5 * 1.3 * KMS  # widen by half a channel against rounding at the edges
    span = u.Quantity([slab.spectral_axis.min() - half_channel, slab.spectral_axis.max() + half_channel])
    maps = moment_maps(cube, span, rest_frequency=CO21)
    assert_allclose(maps.m0.value, slab.moment0().to_value(u.Jy / u.beam * KMS), rtol=1e-5)
    assert_allclose(maps.m1.value, slab.moment1().to_value(KMS), rtol=1e-5, atol=1e-6)
    with np.errstate(invalid="ignore"):
        reference_sigma = slab.linewidth_sigma().to_value(KMS)
    assert_allclose(maps.m2.value, reference_sigma, rtol=1e-5, equal_nan=True)
    assert maps.m0.wcs.wcs.compare(cube.wcs.celestial.wcs)
    assert maps.m0.beam == cube.beam
    assert maps.n_channels == slab.shape[0]


@pytest.mark.parametrize("order", [1, 2])
def test_baseline_removes_sloping_continuum(centred_path, rng, order):
    # Per-pixel polynomial continuum + Gaussian line: after the baseline the analytic moments return.
    amplitude, v0, sigma = 1.5, 3.0, 10.0
    ny, nx = 5, 4
    offset = rng.uniform(-1, 3, (1, ny, nx))
    slope = rng.uniform(-0.01, 0.01, (1, ny, nx))
    curve = rng.uniform(-1e-4, 1e-4, (1, ny, nx)) if order == 2 else 0.0
    v = VEL[:, None, None]
    data = gaussian_cube((NCHAN, ny, nx), amplitude, v0, sigma) + offset + slope * v + curve * v**2
    cube = open_cube(centred_path(data))
    maps = moment_maps(cube, WINDOW, line_free=LINE_FREE, order=order, rest_frequency=CO21)
    # The window spans +-5.7 sigma: the expected moments of the truncated Gaussian are the analytic ones to 1e-6.
    assert_allclose(maps.m0.value, amplitude * sigma * np.sqrt(2 * np.pi), rtol=2e-4)
    assert_allclose(maps.m1.value, v0, atol=2e-3)
    assert_allclose(maps.m2.value, sigma, rtol=2e-4)
    assert maps.order == order and maps.n_line_free > 0
    # float32 storage of the continuum is the only "noise" left
    assert np.all(maps.rms.value < 1e-5)


def test_m0_error_matches_scatter_over_noise_realisations(centred_path, rng):
    # Each pixel is an independent noise realisation of the same line: the scatter of m0 over pixels must
    # equal the reported m0_error (exact white-noise propagation, common practice) within 10 %.
    ny, nx, noise = 60, 60, 0.2
    data = gaussian_cube((NCHAN, ny, nx), 1.0, 0.0, 10.0) + 0.3 + 0.002 * VEL[:, None, None]
    data += rng.normal(0, noise, data.shape)
    cube = open_cube(centred_path(data))
    maps = moment_maps(cube, WINDOW, line_free=LINE_FREE, order=1, rest_frequency=CO21)
    scatter = np.std(maps.m0.value)
    assert np.mean(maps.m0_error.value) == pytest.approx(scatter, rel=0.10)
    assert np.median(maps.rms.value) == pytest.approx(noise, rel=0.03)
    assert np.mean(maps.m0.value) == pytest.approx(10.0 * np.sqrt(2 * np.pi), abs=3 * scatter / 60)


def test_clip_steadies_the_higher_moments(centred_path, rng):
    # Clipping at 3 rms drops noise channels from moments 1 and 2: their scatter shrinks (common practice).
    data = gaussian_cube((NCHAN, 30, 30), 1.0, 5.0, 8.0) + rng.normal(0, 0.1, (NCHAN, 30, 30))
    cube = open_cube(centred_path(data))
    plain = moment_maps(cube, WINDOW, line_free=LINE_FREE, rest_frequency=CO21)
    clipped = moment_maps(cube, WINDOW, line_free=LINE_FREE, rest_frequency=CO21, clip=3)
    assert np.nanstd(clipped.m1.value) < 0.5 * np.nanstd(plain.m1.value)
    assert np.nanmedian(clipped.m1.value) == pytest.approx(5.0, abs=0.3)
    # moment 0 is never clipped (equal up to float32 rounding of the matrix product)
    assert_allclose(clipped.m0.value, plain.m0.value, rtol=1e-5)
    assert clipped.clip == 3.0


def test_redshifted_line_velocities_are_rest_frame(centred_path):
    # A line at z: velocities are offsets from f_rest / (1 + z) (Greisen et al. 2006, A&A 446, 747).
    z = 0.5
    f_obs = CO21.to_value(u.Hz) / (1 + z)
    cdelt = -0.5e6
    freq = f_obs + (np.arange(NCHAN) + 1 - CENTRE) * cdelt
    velocity = C_KMS * (f_obs - freq) / f_obs  # radio convention about the redshifted line
    data = np.broadcast_to(gaussian_profile(velocity, 1.0, 20.0, 15.0)[:, None, None], (NCHAN, 3, 3)).copy()
    cube = open_cube(centred_path(data, crval3=f_obs, cdelt3=cdelt, crpix3=CENTRE, restfrq=None))
    maps = moment_maps(cube, (-70, 110) * KMS, rest_frequency=CO21, z=z)
    assert_allclose(maps.m1.value, 20.0, atol=1e-3)
    assert_allclose(maps.m2.value, 15.0, rtol=1e-4)


def test_scattered_and_blanked_nans_match_naive_reference(centred_path, rng):
    data = gaussian_cube((NCHAN, 8, 9), 1.0, 2.0, 9.0) + rng.normal(0, 0.02, (NCHAN, 8, 9))
    data += 0.5 + 0.003 * VEL[:, None, None]
    data[rng.random(data.shape) < 0.01] = np.nan   # scattered blanks
    data[30] = np.nan                               # one line-free channel blank everywhere
    data[NCHAN // 2 + 3] = np.nan                   # one window channel blank everywhere
    data[:, 0, 0] = np.nan                          # an all-blank spectrum
    data[:, 1, 1][np.abs(VEL) > 69] = np.nan        # no line-free channel left: no baseline possible
    cube = open_cube(centred_path(data))
    maps = moment_maps(cube, WINDOW, line_free=LINE_FREE, order=1, rest_frequency=CO21)
    velocity = VEL
    window = (velocity >= -60) & (velocity <= 60)
    free = ((velocity >= -150) & (velocity <= -70)) | ((velocity >= 70) & (velocity <= 150))
    stored = cube.unmasked_data[:].value.astype(float)
    for y in range(8):
        for x in range(9):
            if (y, x) in ((0, 0), (1, 1)):
                assert np.isnan(maps.m0.value[y, x]) and np.isnan(maps.m1.value[y, x])
                continue
            expected = naive_moments(stored[:, y, x], velocity, window, free, 1)
            got = (maps.m0.value[y, x], maps.m1.value[y, x], maps.m2.value[y, x])
            assert_allclose(got, expected, rtol=1e-6, err_msg=f"pixel {(y, x)}")


def test_cube_mask_is_respected(centred_path, rng):
    # A mask set with with_mask must act exactly as NaN in those voxels.
    data = gaussian_cube((NCHAN, 5, 5), 1.0, 0.0, 10.0) + rng.normal(0, 0.1, (NCHAN, 5, 5))
    cube = open_cube(centred_path(data, name="plain.fits"))
    keep = rng.random(data.shape) > 0.1
    masked = cube.with_mask(keep)
    blanked = np.where(keep, data, np.nan)
    reference = open_cube(centred_path(blanked, name="blanked.fits"))
    kw = dict(line_free=LINE_FREE, rest_frequency=CO21, order=1)
    got, expected = moment_maps(masked, WINDOW, **kw), moment_maps(reference, WINDOW, **kw)
    for name in ("m0", "m1", "m2", "m0_error", "rms"):
        assert_allclose(getattr(got, name).value, getattr(expected, name).value, rtol=1e-12)


def test_dask_backed_cube_gives_the_same_maps(centred_path, rng):
    data = gaussian_cube((NCHAN, 6, 7), 1.0, 0.0, 10.0) + rng.normal(0, 0.1, (NCHAN, 6, 7))
    data[rng.random(data.shape) < 0.01] = np.nan
    path = centred_path(data)
    kw = dict(line_free=LINE_FREE, rest_frequency=CO21, order=1, clip=2)
    eager = moment_maps(open_cube(path), WINDOW, **kw)
    lazy_cube = open_cube(path, use_dask=True)
    lazy = moment_maps(lazy_cube, WINDOW, **kw)
    derived = moment_maps(lazy_cube.with_mask(np.ones(data.shape, bool)), WINDOW, **kw)  # through the dask graph
    for name in ("m0", "m1", "m2", "m0_error", "rms"):
        assert_allclose(getattr(lazy, name).value, getattr(eager, name).value, rtol=0, atol=0)
        assert_allclose(getattr(derived, name).value, getattr(eager, name).value, rtol=1e-12)


def test_block_shape_does_not_change_the_result(centred_path, rng):
    data = gaussian_cube((NCHAN, 7, 5), 1.0, 0.0, 10.0) + rng.normal(0, 0.1, (NCHAN, 7, 5))
    data[rng.random(data.shape) < 0.02] = np.nan
    cube = open_cube(centred_path(data))
    kw = dict(line_free=LINE_FREE, rest_frequency=CO21, order=1)
    whole = moment_maps(cube, WINDOW, block_shape=(7, 5), **kw)
    for shape in [(1, 1), (2, 3), (3, 5), (4, 2), (7, 1)]:
        part = moment_maps(cube, WINDOW, block_shape=shape, **kw)
        assert_allclose(part.m0.value, whole.m0.value, rtol=1e-12)
        assert_allclose(part.m2.value, whole.m2.value, rtol=1e-12, equal_nan=True)


def test_input_file_is_unchanged(centred_path, rng):
    path = centred_path(gaussian_cube() + rng.normal(0, 0.1, (NCHAN, 6, 5)))
    before = file_digest(path)
    moment_maps(open_cube(path), WINDOW, line_free=LINE_FREE, rest_frequency=CO21, clip=2)
    assert file_digest(path) == before


def test_progress_and_cancel(centred_path):
    cube = open_cube(centred_path(gaussian_cube((NCHAN, 8, 8))))
    seen = []
    moment_maps(cube, WINDOW, rest_frequency=CO21, block_shape=(2, 8), progress=seen.append)
    assert seen == sorted(seen) and seen[-1] == 1.0 and len(seen) == 4
    stop = threading.Event()
    stop.set()
    with pytest.raises(CancelledComputation, match="cancelled"):
        moment_maps(cube, WINDOW, rest_frequency=CO21, cancel=stop)


@pytest.mark.parametrize(
    "kwargs, error, match",
    [
        (dict(window=(500, 600) * KMS), SpectralRangeError, "selects no channel"),
        (dict(window=WINDOW, line_free=[(-50, -40)] * KMS), SpectralRangeError, "outside the window"),
        (dict(window=WINDOW, line_free=LINE_FREE, order=7), FitError, "order 7"),
        (dict(window=WINDOW, line_free=[(-70.5, -69.5)] * KMS, order=1), SpectralRangeError, "at least 3"),
        (dict(window=WINDOW, clip=3), SpectralRangeError, "clip needs line_free"),
        (dict(window=WINDOW, line_free=LINE_FREE, clip=-1), SpectralRangeError, "non-negative"),
        (dict(window=(1, 2)), CubeloupeError, "Quantity"),
    ],
)
def test_bad_input_raises_clear_errors(centred_path, kwargs, error, match):
    cube = open_cube(centred_path(gaussian_cube()))
    with pytest.raises(error, match=match):
        moment_maps(cube, rest_frequency=CO21, **kwargs)


def test_velocity_window_needs_a_rest_frequency(centred_path):
    cube = open_cube(centred_path(gaussian_cube(), restfrq=None))
    with pytest.raises(SpectralAxisError, match="rest_frequency"):
        moment_maps(cube, WINDOW)


def test_all_blank_window_raises(centred_path):
    data = gaussian_cube()
    data[(VEL > -70) & (VEL < 70)] = np.nan
    cube = open_cube(centred_path(data))
    with pytest.raises(SpectralRangeError, match="no valid data"):
        moment_maps(cube, WINDOW, rest_frequency=CO21)


@pytest.mark.slow
def test_memory_stays_bounded_on_a_1gb_memory_mapped_cube(tmp_path):
    # Issue 7: with tracemalloc on, moment maps of a >= 1 GB memory-mapped cube peak under 300 MB.
    import tracemalloc

    from cubefactory import make_header

    shape = (1000, 512, 528)  # 1.08e9 bytes of float32
    header = make_header(shape, crpix3=500.5)
    path = tmp_path / "big.fits"
    header_bytes = header.tostring().encode("ascii")
    with open(path, "wb") as handle:
        handle.write(header_bytes)
        data_bytes = int(np.prod(shape)) * 4
        handle.truncate(len(header_bytes) + data_bytes + (-data_bytes) % 2880)  # sparse: all zeros
    cube = open_cube(path)
    assert cube.shape == shape
    tracemalloc.start()
    try:
        maps = moment_maps(cube, WINDOW, line_free=LINE_FREE, order=1, rest_frequency=CO21)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert np.all(maps.m0.value == 0)
    assert peak < 300 * 2**20, f"peak {peak / 2**20:.0f} MB"


def test_per_channel_beams_give_the_common_beam_of_the_window(centred_path, rng):
    # Reference: radio-beam's Beams.common_beam over the window's channels.
    beams = np.column_stack([np.linspace(1.0, 1.3, NCHAN), np.linspace(0.8, 1.0, NCHAN), np.zeros(NCHAN)])
    cube = open_cube(centred_path(gaussian_cube() + rng.normal(0, 0.1, (NCHAN, 6, 5)), beams=beams, beam=None))
    maps = moment_maps(cube, WINDOW, line_free=LINE_FREE, rest_frequency=CO21)
    window = (VEL >= -60) & (VEL <= 60)
    expected = cube.beams[window].common_beam()
    assert maps.m0.beam.major.to_value(u.arcsec) == pytest.approx(expected.major.to_value(u.arcsec))
    assert maps.m0.beam.minor.to_value(u.arcsec) == pytest.approx(expected.minor.to_value(u.arcsec))


def test_temperature_cube_without_beam(centred_path):
    cube = open_cube(centred_path(gaussian_cube(), bunit="K", beam=None))
    maps = moment_maps(cube, WINDOW, rest_frequency=CO21)
    assert maps.m0.unit == u.K * KMS


def test_moment_maps_of_a_lone_stokes_q_plane_are_refused_unless_asked(centred_path):
    # CRVAL4 = 2 on a STOKES axis is Q (Greisen & Calabretta 2002, A&A 395, 1061, Table 7); moment 0 of
    # Q is not an integrated intensity of the source, so it is refused unless asked for (#13).
    data = gaussian_cube()
    with pytest.warns(PolarisationWarning):
        q_cube = open_cube(centred_path(data, name="plane_q.fits", stokes=True, extra={"CRVAL4": 2.0}))
    with pytest.raises(PolarisationError, match=r"plane_q\.fits.*Stokes Q.*allow_polarisation=True"):
        moment_maps(q_cube, WINDOW, line_free=LINE_FREE, rest_frequency=CO21)
    asked = moment_maps(q_cube, WINDOW, line_free=LINE_FREE, rest_frequency=CO21, allow_polarisation=True)
    # Asked for, the maps are the plain moments of the values (numpy reference above).
    free = (np.abs(VEL) >= 70) & (np.abs(VEL) <= 150)
    window = np.abs(VEL) <= 60
    expected = naive_moments(data[:, 0, 0].astype(np.float32).astype(float), VEL, window, free, 1)
    assert_allclose(asked.m0.value[0, 0], expected[0], rtol=1e-5)
    assert_allclose(asked.m1.value[0, 0], expected[1], atol=1e-3)


@pytest.mark.parametrize("compiled", [True, False])
def test_streamed_sums_match_naive_reference_with_bright_continuum(centred_path, rng, monkeypatch, compiled):
    # Blocks are read a slab of channels at a time and summed by the compiled kernel (numba) or by
    # numpy products; both must give the float64 reference's moments and rms, also where a bright
    # continuum leaves a residual much smaller than |y|^2 (those pixels are redone exactly).
    import cubeloupe.analysis.blocks as blocks_module
    import cubeloupe.analysis.moments as moments_module

    monkeypatch.setattr(blocks_module, "SLAB_CHANNELS", 7)  # many slabs, of odd sizes
    if not compiled:
        monkeypatch.setattr(moments_module, "accumulate", None)
    elif moments_module.accumulate is None:
        pytest.skip("numba is not installed")
    shape = (NCHAN, 6, 7)
    data = gaussian_cube(shape, 1.0, 2.0, 9.0) + rng.normal(0, 0.05, shape)
    data += 0.2 + 0.002 * VEL[:, None, None]
    data[:, 2, :] += 400.0                                # continuum 8000 sigma: residual << |y|^2
    data[rng.random(data.shape) < 0.005] = np.nan        # scattered blanks
    cube = open_cube(centred_path(data))
    maps = moment_maps(cube, WINDOW, line_free=LINE_FREE, order=1, rest_frequency=CO21)
    window = (VEL >= -60) & (VEL <= 60)
    free = ((VEL >= -150) & (VEL <= -70)) | ((VEL >= 70) & (VEL <= 150))
    stored = cube.unmasked_data[:].value.astype(float)
    for y in range(shape[1]):
        for x in range(shape[2]):
            spectrum = stored[:, y, x]
            expected = naive_moments(spectrum, VEL, window, free, 1)
            got = (maps.m0.value[y, x], maps.m1.value[y, x], maps.m2.value[y, x])
            assert_allclose(got, expected, rtol=2e-5, err_msg=f"pixel {(y, x)}")
            # rms of the line-free residual after a least-squares line (numpy polyfit, reference library)
            use = free & np.isfinite(spectrum)
            coefficients = np.polynomial.polynomial.polyfit(VEL[use], spectrum[use], 1)
            residual = spectrum[use] - np.polynomial.polynomial.polyval(VEL[use], coefficients)
            rms = np.sqrt(np.sum(residual**2) / (use.sum() - 2))
            assert_allclose(maps.rms.value[y, x], rms, rtol=1e-3, err_msg=f"pixel {(y, x)}")
