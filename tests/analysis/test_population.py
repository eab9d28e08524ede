"""Population diagrams (analysis/population.py) against the formulas they come from, computed here by hand.

Synthetic intensities are built in this file from astropy's constants with the published formulas, never
from cubeloupe's own conversion functions, and fitted back.
"""

import astropy.units as u
import numpy as np
import pytest
from astropy.constants import c, h, k_B
from astropy.cosmology import Planck18, WMAP9
from astropy.table import QTable, Table

from cubeloupe.analysis import (
    MEASUREMENT_COLUMNS, CatalogError, CubeloupeError, FitError, ParameterError, RedshiftError, UnitMismatchError,
    find_line, partition_energy_zero, partition_function, population_diagram,
)

K_KMS = u.K * u.km / u.s
JY_KMS = u.Jy * u.km / u.s
CO_LINES = [f"CO J={j}-{j - 1}" for j in range(1, 7)]
# CO rotational constant B = 57.635968 GHz (CDMS entry 28503, from memory).
CO_B = 57.635968 * u.GHz


def rigid_rotor_q(temperature):
    # Linear rigid rotor: Q ~ kT/(hB) + 1/3 (Mangum & Shirley 2015, PASP 127, 266, Sect. 4 on linear molecules;
    # McDowell 1988's expansion, from memory).
    return float((k_B * temperature / (h * CO_B)).to(u.one)) + 1 / 3


def brightness_from_column(n_u, row):
    # Goldsmith & Langer 1999, ApJ 517, 209 inverted: W = h c^3 A N_u / (8 pi k nu^2).
    nu, a_ul = row["rest_frequency"], row["einstein_A"]
    return (h * c**3 * a_ul * n_u / (8 * np.pi * k_B * nu**2)).to(K_KMS)


def ltepop(row, total, temperature, q, energy_zero=0 * u.K):
    # LTE: N_u = N g_u exp(-(E_up - E_0)/kT) / Q (Goldsmith & Langer 1999).
    return total * row["g_up"] * np.exp(-float((row["E_up"] - energy_zero) / temperature)) / q


def table_of(names, fluxes, rel_error=0.05, **extra):
    fluxes = u.Quantity(fluxes)
    return QTable({"line": names, "flux": fluxes, "flux_error": rel_error * fluxes, **extra})


# ---------------------------------------------------------------------------
# The linear rotor (the first check)
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("temperature", [20 * u.K, 50 * u.K, 120 * u.K])
def test_linear_rotor_recovered(temperature):
    column = 3e16 / u.cm**2
    q = rigid_rotor_q(temperature)
    rows = [find_line(name) for name in CO_LINES]
    fluxes = u.Quantity([brightness_from_column(ltepop(r, column, temperature, q), r) for r in rows])
    fit = population_diagram(table_of(CO_LINES, fluxes))
    # The issue: T within 1 %, N within 3 % (the fit's Q is CDMS's table, the synthetic one the expansion).
    assert abs(fit.temperature / temperature - 1) < 0.01
    assert abs(fit.column_density / column - 1) < 0.03
    assert fit.degrees_of_freedom == 4 and fit.chi2 < 1e-12
    assert np.isnan(fit.total_number) and np.isnan(fit.mass)


def test_errors_from_the_covariance_match_a_monte_carlo():
    # The linear propagation of the fit covariance agrees with the spread of refits of noisy data
    # (common practice: a Monte Carlo check of a linearised error).
    temperature, column = 40 * u.K, 1e16 / u.cm**2
    rows = [find_line(name) for name in CO_LINES]
    q = float(partition_function("CO", temperature))
    truth = u.Quantity([brightness_from_column(ltepop(r, column, temperature, q), r) for r in rows])
    errors = 0.05 * truth
    fit = population_diagram(QTable({"line": CO_LINES, "flux": truth, "flux_error": errors}))
    rng = np.random.default_rng(3)
    temps, columns = [], []
    for _ in range(400):
        noisy = truth + errors * rng.standard_normal(len(truth))
        f = population_diagram(QTable({"line": CO_LINES, "flux": noisy, "flux_error": errors}))
        temps.append(f.temperature.value)
        columns.append(f.column_density.value)
    assert np.std(temps) == pytest.approx(fit.temperature_error.value, rel=0.15)
    assert np.std(columns) == pytest.approx(fit.column_density_error.value, rel=0.15)
    # The errors come from the covariance, not from the (zero) scatter of exact points.
    assert fit.chi2 < 1e-12 and fit.temperature_error > 0


def test_weighted_fit_agrees_with_numpy_polyfit():
    # numpy.polyfit with w = 1/sigma and cov="unscaled" is the reference weighted straight line.
    rows = [find_line(name) for name in CO_LINES[:4]]
    fluxes = [1.2, 3.9, 6.1, 6.8] * K_KMS
    errors = [0.1, 0.2, 0.4, 0.5] * K_KMS
    fit = population_diagram(QTable({"line": CO_LINES[:4], "flux": fluxes, "flux_error": errors}))
    x = np.array([float(r["E_up"].value) for r in rows])
    y = fit.points["ln(N_u/g_u)"]
    (slope, intercept), cov = np.polyfit(x, y, 1, w=1 / fit.points["ln(N_u/g_u)_error"], cov="unscaled")
    assert fit.temperature.value == pytest.approx(-1 / slope, rel=1e-10)
    assert fit.temperature_error.value == pytest.approx(np.sqrt(cov[0, 0]) / slope**2, rel=1e-8)
    assert fit.components["all"].intercept == pytest.approx(intercept, rel=1e-10)


def test_points_table_for_the_diagram():
    fit = population_diagram(table_of(CO_LINES[:3], [1.2, 3.9, 6.1] * K_KMS))
    points = fit.points
    for name in ("line", "E_up", "ln(N_u/g_u)", "ln(N_u/g_u)_error", "upper_limit", "ln(N_u/g_u)_model"):
        assert name in points.colnames
    assert points["E_up"].unit == u.K
    # ln(N_u/g_u) is the log of the column density per statistical weight (Goldsmith & Langer 1999).
    row = find_line("CO J=2-1")
    n_u = (8 * np.pi * k_B * row["rest_frequency"] ** 2 * 3.9 * K_KMS / (h * c**3 * row["einstein_A"])).to(u.cm**-2)
    assert points["ln(N_u/g_u)"][1] == pytest.approx(np.log(n_u.value / 5), rel=1e-10)
    assert points["ln(N_u/g_u)_error"][1] == pytest.approx(0.05)
    assert "Goldsmith & Langer 1999" in fit.method and "optically thin" in fit.method


# ---------------------------------------------------------------------------
# Jy km/s of an unresolved source at z (the second check)
# ---------------------------------------------------------------------------

def hand_number_upper(s_dv, row, z, mu, cosmology=Planck18):
    # L = 4 pi D_L^2 F, F = S dv nu_obs / c, L = N_u A h nu_rest (Solomon & Vanden Bout 2005, ARA&A 43, 677, eq. 1)
    d_l = cosmology.luminosity_distance(z)
    f = s_dv * (row["rest_frequency"] / (1 + z)) / c
    return (4 * np.pi * d_l**2 * f / (row["einstein_A"] * h * row["rest_frequency"] * mu)).to(u.one)


@pytest.mark.parametrize("cosmology", [None, WMAP9])
def test_jy_path_against_a_hand_computation(cosmology):
    z, mu = 3.1, 12.0
    names = CO_LINES[2:6]
    fluxes = [2.0, 3.1, 3.6, 3.3] * JY_KMS
    fit = population_diagram(table_of(names, fluxes), z=z, magnification=mu, cosmology=cosmology)
    reference = cosmology or Planck18
    n_u = [hand_number_upper(f, find_line(n), z, mu, reference) for n, f in zip(names, fluxes)]
    assert_close = np.testing.assert_allclose
    assert_close(fit.points["N_u"].value, [n.value for n in n_u], rtol=1e-10)
    # N = Q(T) exp(intercept), and the mass is N times the molecule's (CO: 27.9949 u, NIST, from memory).
    q = partition_function("CO", fit.temperature)
    total = q * np.exp(fit.components["all"].intercept)
    assert fit.total_number.value == pytest.approx(float(total), rel=1e-9)
    assert fit.mass.to_value(u.kg) == pytest.approx(float(total) * 27.9949 * 1.66053907e-27, rel=1e-5)
    assert fit.mass.unit == u.M_sun and np.isnan(fit.column_density)
    assert fit.cosmology == reference.name and fit.magnification == mu


def test_jy_lines_recover_a_known_number():
    z, mu, number, temperature = 2.5, 4.0, 3e62, 60 * u.K
    q = float(partition_function("CO", temperature))
    names = CO_LINES[2:]
    fluxes = []
    for name in names:
        row = find_line(name)
        n_u = ltepop(row, number, temperature, q)
        d_l = Planck18.luminosity_distance(z)
        # S dv = (1 + z) c h A N_u mu / (4 pi D_L^2): the formula, inverted.
        fluxes.append(((1 + z) * c * h * row["einstein_A"] * n_u * mu / (4 * np.pi * d_l**2)).to(JY_KMS))
    fit = population_diagram(table_of(names, u.Quantity(fluxes)), z=z, magnification=mu)
    assert fit.temperature.value == pytest.approx(60, rel=1e-9)
    assert fit.total_number.value == pytest.approx(number, rel=1e-9)
    # The magnification divides the count: the same fluxes unlensed give mu times more molecules.
    plain = population_diagram(table_of(names, u.Quantity(fluxes)), z=z)
    assert plain.total_number.value == pytest.approx(mu * number, rel=1e-9)


def test_jy_without_redshift_is_refused():
    with pytest.raises(RedshiftError, match="z > 0"):
        population_diagram(table_of(CO_LINES[:3], [1, 2, 3] * JY_KMS))


# ---------------------------------------------------------------------------
# Ortho and para
# ---------------------------------------------------------------------------

NH3_ORTHO = ["NH3 (J,K)=(3,3)", "NH3 (J,K)=(6,6)", "NH3 (J,K)=(4,3)"]
NH3_PARA = ["NH3 (J,K)=(1,1)", "NH3 (J,K)=(2,2)", "NH3 (J,K)=(4,4)", "NH3 (J,K)=(2,1)"]


def nh3_table(temperature, n_ortho, n_para, names=NH3_ORTHO + NH3_PARA):
    fluxes = []
    for name in names:
        row = find_line(name)
        spin = str(row["spin_isomer"])
        # Each spin species with its own Q and energy zero (partition.py; e.g. para-NH3 from (1,1)).
        q = partition_function("NH3", temperature, spin_isomer=spin)
        zero = partition_energy_zero("NH3", spin)
        n = n_ortho if spin == "ortho" else n_para
        fluxes.append(brightness_from_column(ltepop(row, n, temperature, q, zero), row))
    return table_of(names, u.Quantity(fluxes))


def test_joint_fit_recovers_temperature_and_ratio():
    temperature, n_o, n_p = 35 * u.K, 2e14 / u.cm**2, 1e14 / u.cm**2
    fit = population_diagram(nh3_table(temperature, n_o, n_p), spin="joint")
    assert fit.temperature.value == pytest.approx(35, rel=1e-9)
    assert fit.ortho_para_ratio == pytest.approx(2.0, rel=1e-9)
    assert fit.column_density.value == pytest.approx(3e14, rel=1e-9)
    assert fit.ortho_para_ratio_error > 0
    assert set(fit.components) == {"ortho", "para"}
    # The energy zero of each spin species is reported (para-NH3 counts from (1,1), 22.1 K).
    assert fit.energy_zero["para"].value == pytest.approx(22.1, abs=0.1)
    assert fit.energy_zero["ortho"].value == 0
    assert "energy zero" in fit.method


def test_separate_fits_each_spin_species():
    fit = population_diagram(nh3_table(35 * u.K, 2e14 / u.cm**2, 1e14 / u.cm**2), spin="separate")
    assert fit.components["ortho"].temperature.value == pytest.approx(35, rel=1e-9)
    assert fit.components["para"].temperature.value == pytest.approx(35, rel=1e-9)
    assert np.isnan(fit.temperature)
    assert fit.ortho_para_ratio == pytest.approx(2.0, rel=1e-9)


def test_ratio_error_is_the_quadrature_sum_in_a_separate_fit():
    # Independent fits: sigma(R)/R = sqrt((sigma_o/N_o)^2 + (sigma_p/N_p)^2) (linear propagation, common practice).
    fit = population_diagram(nh3_table(35 * u.K, 2e14 / u.cm**2, 1e14 / u.cm**2), spin="separate")
    o, p = fit.components["ortho"], fit.components["para"]
    expected = fit.ortho_para_ratio * np.hypot(float(o.amount_error / o.amount), float(p.amount_error / p.amount))
    assert fit.ortho_para_ratio_error == pytest.approx(expected, rel=1e-9)


WATER = ["H2O 2_02-1_11", "H2O 2_11-2_02", "H2O 1_11-0_00", "H2O 3_12-3_03", "H2O 3_21-3_12", "H2O 1_10-1_01",
         "H2O 2_21-2_12"]


def water_fluxes(populations, z, mu):
    d_l = Planck18.luminosity_distance(z)
    # S dv = (1 + z) c h A N_u mu / (4 pi D_L^2) (issue #16, from Solomon & Vanden Bout 2005, ARA&A 43, 677).
    return u.Quantity([((1 + z) * c * h * find_line(n)["einstein_A"] * populations(find_line(n)) * mu
                        / (4 * np.pi * d_l**2)).to(JY_KMS) for n in WATER])


def test_water_ortho_and_para_recovered_at_z():
    z, mu, temperature, n_o, n_p = 3.1, 12.0, 80 * u.K, 1.5e61, 0.6e61

    def populations(row):
        spin = str(row["spin_isomer"])
        q = partition_function("H2O", temperature, spin_isomer=spin)
        return ltepop(row, n_o if spin == "ortho" else n_p, temperature, q, partition_energy_zero("H2O", spin))

    fit = population_diagram(table_of(WATER, water_fluxes(populations, z, mu)), z=z, magnification=mu)
    assert fit.temperature.value == pytest.approx(80, rel=1e-9)
    assert fit.ortho_para_ratio == pytest.approx(2.5, rel=1e-9)
    assert fit.total_number.value == pytest.approx(2.1e61, rel=1e-9)
    # H2O ortho counts from 1_01, 34.2 K above 0_00 (JPL/CDMS energy levels, from memory).
    assert fit.energy_zero["ortho"].value == pytest.approx(34.23, abs=0.01)


def test_water_in_lte_agrees_with_the_total_partition_function():
    # JPL's water Q sums both spin species with weights 3 (ortho) and 1 (para) (Pickett et al. 1998), so in LTE
    # N_u = N g_s g_u exp(-E_up/kT) / Q_total. The fit, with each spin species' own Q, gets the same total back
    # (to the 1 % to which the bundled tables add up) and the LTE ratio 3 Q_o exp(-E_0/kT) / Q_p.
    z, mu, number, temperature = 3.1, 12.0, 2e61, 80 * u.K
    q_total = float(partition_function("H2O", temperature))

    def populations(row):
        return ltepop(row, number * (3 if row["spin_isomer"] == "ortho" else 1), temperature, q_total)

    fit = population_diagram(table_of(WATER, water_fluxes(populations, z, mu)), z=z, magnification=mu, spin="joint")
    assert fit.temperature.value == pytest.approx(80, rel=1e-9)
    assert fit.total_number.value == pytest.approx(number, rel=0.01)
    q_o = partition_function("H2O", temperature, spin_isomer="ortho")
    q_p = partition_function("H2O", temperature, spin_isomer="para")
    lte_ratio = 3 * q_o * np.exp(-partition_energy_zero("H2O", "ortho") / temperature) / q_p
    assert fit.ortho_para_ratio == pytest.approx(float(lte_ratio), rel=1e-9)
    assert 2.9 < fit.ortho_para_ratio < 3.1  # statistical 3 at high temperature (common practice)


# ---------------------------------------------------------------------------
# Few points, upper limits
# ---------------------------------------------------------------------------

def test_two_lines_fit_but_the_straight_line_is_untested():
    fit = population_diagram(table_of(CO_LINES[:2], [1.2, 3.9] * K_KMS))
    assert np.isfinite(fit.temperature) and fit.degrees_of_freedom == 0
    assert np.isnan(fit.reduced_chi2)
    assert any("goodness of fit" in text for text in fit.undetermined)


def test_one_line_cannot_give_a_temperature():
    with pytest.raises(FitError, match="two detected lines at different E_up"):
        population_diagram(table_of(CO_LINES[:1], [1.2] * K_KMS))


def test_separate_fit_says_which_spin_species_is_undetermined():
    names = NH3_ORTHO[:1] + NH3_PARA
    fit = population_diagram(nh3_table(35 * u.K, 2e14 / u.cm**2, 1e14 / u.cm**2, names), spin="separate")
    assert set(fit.components) == {"para"}
    assert np.isnan(fit.ortho_para_ratio) and np.isnan(fit.column_density)
    assert any(text.startswith("ortho NH3: temperature and amount") for text in fit.undetermined)
    # The same lines in a joint fit determine the ratio: the para ladder gives T, the one ortho line its intercept.
    joint = population_diagram(nh3_table(35 * u.K, 2e14 / u.cm**2, 1e14 / u.cm**2, names), spin="joint")
    assert joint.ortho_para_ratio == pytest.approx(2.0, rel=1e-9)


def test_upper_limits_do_not_enter_the_fit_but_are_checked():
    temperature, column = 30 * u.K, 1e16 / u.cm**2
    q = float(partition_function("CO", temperature))
    rows = [find_line(n) for n in CO_LINES]
    truth = u.Quantity([brightness_from_column(ltepop(r, column, temperature, q), r) for r in rows])
    limit_low = truth.copy()
    limit_low[-1] = truth[-1] / 3  # a "3 sigma limit" below what the detections predict
    flags = np.array([False] * 5 + [True])
    fit = population_diagram(QTable({"line": CO_LINES, "flux": limit_low, "flux_error": 0.05 * truth,
                                     "upper_limit": flags}))
    assert fit.temperature.value == pytest.approx(30, rel=1e-9)  # the limit did not move the fit
    assert fit.limit_violations == ("CO J=6-5",) and fit.points["violates_limit"][-1]
    limit_high = truth.copy()
    limit_high[-1] = truth[-1] * 3
    fit = population_diagram(QTable({"line": CO_LINES, "flux": limit_high, "flux_error": 0.05 * truth,
                                     "upper_limit": flags}))
    assert fit.limit_violations == () and not fit.points["violates_limit"].any()
    assert fit.points["upper_limit"][-1] and np.isnan(fit.points["ln(N_u/g_u)_error"][-1])


# ---------------------------------------------------------------------------
# Corrections (options stated in the result)
# ---------------------------------------------------------------------------

def test_optical_depth_correction_multiplies_n_u_by_c_tau():
    # C_tau = tau / (1 - exp(-tau)) (Goldsmith & Langer 1999).
    table = table_of(CO_LINES[:3], [1.2, 3.9, 6.1] * K_KMS)
    thin = population_diagram(table)
    thick = population_diagram(table, optical_depth={"CO J=1-0": 1.0})
    ratio = thick.points["N_u"][0] / thin.points["N_u"][0]
    assert float(ratio) == pytest.approx(1 / (1 - np.exp(-1.0)), rel=1e-12)
    assert "C_tau" in thick.method


@pytest.mark.parametrize("radiation", ["rayleigh-jeans", "planck"])
def test_background_correction_recovers_the_temperature(radiation):
    # Against a background T_bg: W = (h c^3 A N_u / (8 pi k nu^2)) (1 - J(T_bg)/J(T)) (optically thin radiative
    # transfer, Mangum & Shirley 2015, PASP 127, 266).
    temperature, column, background = 12 * u.K, 1e16 / u.cm**2, 2.725 * u.K
    q = float(partition_function("CO", temperature))

    def j(t, nu):
        t0 = (h * nu / k_B).to_value(u.K)
        return t0 / np.expm1(t0 / t) if radiation == "planck" else t

    fluxes = []
    for name in CO_LINES[:4]:
        row = find_line(name)
        factor = 1 - j(background.value, row["rest_frequency"]) / j(temperature.value, row["rest_frequency"])
        fluxes.append(brightness_from_column(ltepop(row, column, temperature, q), row) * factor)
    fit = population_diagram(table_of(CO_LINES[:4], u.Quantity(fluxes)), background_temperature=background,
                             radiation=radiation)
    assert fit.temperature.value == pytest.approx(12, rel=1e-6)
    assert fit.column_density.value == pytest.approx(1e16, rel=1e-5)
    assert "background 2.725 K" in fit.method
    plain = population_diagram(table_of(CO_LINES[:4], u.Quantity(fluxes)))
    if radiation == "planck":  # J(T_bg)/J(T) depends on nu: the slope changes
        assert abs(plain.temperature.value - 12) > 0.1
    else:  # T_bg/T is the same for every line: only the amount changes, by 1 - T_bg/T
        assert plain.temperature.value == pytest.approx(12, rel=1e-9)
        assert float(plain.column_density / fit.column_density) == pytest.approx(1 - 2.725 / 12, rel=1e-6)


# ---------------------------------------------------------------------------
# The suite's measurement table, and bad input
# ---------------------------------------------------------------------------

def measurement_like(regions=("knot",)):
    rows = []
    for region in regions:
        for i, (name, flux) in enumerate(zip(CO_LINES[2:5], [2.0, 3.1, 3.6])):
            rows.append((region, i, name, flux, 0.2, 0.0, 1.0, 300.0, 10.0, 10.0, 1e10, 1e9))
    table = QTable(rows=rows, names=MEASUREMENT_COLUMNS)
    for name in ("flux", "flux_error"):
        table[name] = table[name] * JY_KMS
    return table


def test_measurement_table_columns_are_valid_input():
    fit = population_diagram(measurement_like(), z=3.1)
    assert np.isfinite(fit.total_number)
    with pytest.raises(ParameterError, match=r"several regions \['a', 'b'\]; pass region="):
        population_diagram(measurement_like(("a", "b")), z=3.1)
    assert population_diagram(measurement_like(("a", "b")), z=3.1, region="b").total_number == fit.total_number


def test_plain_table_with_unit_attributes_is_read():
    table = Table({"line": CO_LINES[:3], "flux": [1.2, 3.9, 6.1], "flux_error": [0.1, 0.2, 0.4]})
    table["flux"].unit = table["flux_error"].unit = K_KMS
    assert population_diagram(table).temperature == population_diagram(
        table_of(CO_LINES[:3], [1.2, 3.9, 6.1] * K_KMS, rel_error=np.array([0.1 / 1.2, 0.2 / 3.9, 0.4 / 6.1]))
    ).temperature


@pytest.mark.parametrize("change, error, match", [
    (lambda t: t.__setitem__("line", ["CO J=1-0", "CO J=2-1", "CO J=33-2"]), CatalogError, "CO J=33-2"),
    (lambda t: t.remove_column("flux_error"), ParameterError, r"lacks the column\(s\) \['flux_error'\]"),
    (lambda t: t.__setitem__("flux_error", [0.1, 0.2, 0.4] * JY_KMS), UnitMismatchError, "same kind of unit"),
    (lambda t: t.__setitem__("flux_error", [0.1, -0.2, 0.4] * K_KMS), ParameterError, "'CO J=2-1' has flux_error"),
    (lambda t: t.__setitem__("flux", [1.2, -3.9, 6.1] * K_KMS), ParameterError, "upper_limit=True"),
    (lambda t: t.__setitem__("flux", [1.2, 3.9, 6.1] * u.K), UnitMismatchError, "integrated over the line"),
    (lambda t: t.__setitem__("line", ["CO J=1-0", "CO J=2-1", "co j=2-1"]), ParameterError, "appears twice"),
])
def test_bad_input_names_the_value_and_the_fix(change, error, match):
    table = table_of(CO_LINES[:3], [1.2, 3.9, 6.1] * K_KMS)
    change(table)
    with pytest.raises(error, match=match):
        population_diagram(table)
    assert issubclass(error, CubeloupeError)


def test_unknown_line_suggests_close_names():
    with pytest.raises(CatalogError, match="did you mean"):
        population_diagram(table_of(["CO J=1-0", "CO J=2-1", "CO J=3-3"], [1, 2, 3] * K_KMS))


def test_flux_without_unit_and_bad_options():
    with pytest.raises(UnitMismatchError, match="no unit"):
        population_diagram(Table({"line": CO_LINES[:3], "flux": [1.2, 3.9, 6.1], "flux_error": [0.1, 0.2, 0.4]}))
    table = table_of(CO_LINES[:3], [1.2, 3.9, 6.1] * K_KMS)
    with pytest.raises(ParameterError, match="unknown spin 'both'"):
        population_diagram(table, spin="both")
    with pytest.raises(ParameterError, match="several species"):
        population_diagram(table_of(["CO J=1-0", "CO J=2-1", "13CO J=1-0"], [1, 2, 3] * K_KMS))
    with pytest.raises(CatalogError, match="no Einstein A"):
        population_diagram(table_of(["H2O 5_15-4_22", "H2O 1_10-1_01", "H2O 4_14-3_21"], [1, 2, 3] * JY_KMS), z=2)


def test_rising_points_say_no_temperature_fits():
    with pytest.raises(FitError, match="rises with E_up"):
        population_diagram(table_of(CO_LINES[:3], [0.01, 3.9, 600.0] * K_KMS))


# ---------------------------------------------------------------------------
# A published worked example
# ---------------------------------------------------------------------------

def mangum_shirley_c18o(w_k_kms, t_ex):
    # Mangum & Shirley 2015, PASP 127, 266, Sect. 12.1 (the C18O J=1-0 worked example), optically thin, no
    # background: N_tot = 2.48e14 (T_ex + 0.88) exp(5.27/T_ex) / (exp(5.27/T_ex) - 1) W / J(T_ex) cm^-2, with
    # J(T) = 5.27 / (exp(5.27/T) - 1) K (the constants 2.48e14, 0.88 K and 5.27 K from memory).
    x = 5.27 / t_ex
    return 2.48e14 * (t_ex + 0.88) * np.exp(x) / np.expm1(x) * w_k_kms / (5.27 / np.expm1(x))


@pytest.mark.parametrize("temperature", [8.0, 15.0, 30.0])
def test_c18o_column_agrees_with_the_mangum_shirley_worked_example(temperature):
    names = ["C18O J=1-0", "C18O J=2-1", "C18O J=3-2"]
    column = 2e15 / u.cm**2
    q = float(partition_function("C18O", temperature * u.K))
    fluxes = u.Quantity([brightness_from_column(ltepop(find_line(n), column, temperature * u.K, q), find_line(n))
                         for n in names])
    fit = population_diagram(table_of(names, fluxes))
    expected = mangum_shirley_c18o(fluxes[0].to_value(K_KMS), fit.temperature.to_value(u.K))
    # Their closed form uses the rigid-rotor Q expansion and rounded constants: agreement to 3 %.
    assert fit.column_density.to_value(u.cm**-2) == pytest.approx(expected, rel=0.03)
