"""Population diagrams: an excitation temperature and an amount of gas from several lines of one molecule.

The population (rotation) diagram of Goldsmith & Langer (1999, ApJ 517, 209)
plots, for each optically thin line, ``ln(N_u / g_u)`` against the upper-level
energy ``E_up / k``. In LTE at temperature T the points lie on the straight line

    ln(N_u / g_u) = ln(N / Q(T)) - (E_up - E_0) / (k T),

so the slope gives T and the intercept, with the partition function Q(T), the
total N: a column density [cm^-2] for intensities in K km/s, or a number of
molecules (and a mass) for fluxes in Jy km/s of an unresolved source at
redshift z (see `cubeloupe.analysis.level_populations` for N_u).

The straight line is a weighted least-squares fit, ``sigma(ln W) = sigma_W / W``
as the weights; the errors of T, N and the ortho-to-para ratio come from the
fit's full covariance matrix, propagated linearly, not from the scatter of the
points (the reduced chi^2 says whether the scatter agrees with the errors).

Ortho and para lines of one molecule are two spin species, each with its own
partition function and energy zero (`spin_partition_function`): ``spin="joint"``
fits one temperature and one intercept per spin species, which gives the
ortho-to-para ratio ``N_ortho / N_para`` with its error from the covariance;
``spin="separate"`` fits each spin species on its own.

Upper limits (rows with ``upper_limit`` True, the flux being the limit, e.g.
3 sigma) do not enter the least squares; after the fit, a limit that lies
below the fitted line (the fit predicts more than the limit allows) is
flagged in ``points["violates_limit"]`` and `PopulationDiagram.limit_violations`.

What a fit cannot determine is said: when no temperature can be fitted (too
few detected lines, points that rise with energy) `FitError` names the lines
and what is missing; when a part cannot be (a spin species with one line in a
separate fit, a temperature outside the partition function's table, the
goodness of fit with no degree of freedom) that part is NaN and
`PopulationDiagram.undetermined` says why.

Results are quick-look numbers: the optically thin, LTE, one-temperature
assumptions are the user's to check.

Examples
--------
>>> import astropy.units as u
>>> from astropy.table import QTable
>>> lines = QTable({"line": ["CO J=1-0", "CO J=2-1", "CO J=3-2"],
...                 "flux": [1.2, 3.9, 6.1] * u.K * u.km / u.s,
...                 "flux_error": [0.1, 0.2, 0.4] * u.K * u.km / u.s})
>>> fit = population_diagram(lines)
>>> fit.temperature.round(1), fit.points["line"].tolist()
(<Quantity 47.8 K>, ['CO J=1-0', 'CO J=2-1', 'CO J=3-2'])
"""

from dataclasses import dataclass, field

import astropy.units as u
import numpy as np
from astropy.table import QTable

from .errors import CatalogError, FitError, ParameterError, UnitMismatchError
from .hyperfine import planck_temperature
from .level_populations import (STATISTICAL_ORTHO_PARA, check_magnification, molecular_mass, spin_partition_function,
                                upper_level_population)
from .line_intensities import read_line_intensities
from .luminosity import get_cosmology
from .spectral import check_redshift

__all__ = ["PopulationDiagram", "PopulationComponent", "population_diagram", "SPIN_FITS", "RADIATION_LAWS"]

SPIN_FITS = ("joint", "separate")
RADIATION_LAWS = ("rayleigh-jeans", "planck")
_LN = "ln(N_u/g_u)"


@dataclass(frozen=True)
class PopulationComponent:
    """The straight line fitted to one spin species (``"ortho"``, ``"para"``) or a whole molecule (``"all"``).

    Attributes
    ----------
    spin_isomer : str
    temperature, temperature_error : Quantity [K]
        Shared with the other spin species in a joint fit.
    amount, amount_error : Quantity [cm^-2 or dimensionless]
        This spin species' column density, or number of molecules.
    intercept, slope : float
        ``ln(N_u/g_u) = intercept + slope * E_up/K``; slope = -1/T.
    energy_zero : Quantity [K]
        The level the partition function counts from, on the catalog's E_up scale.
    partition_function : Quantity [dimensionless]
        Q of this spin species at the fitted temperature.
    partition_function_kind : str
        "own partition function", or the high-temperature share of a total one.
    lines : tuple of str
        The detected lines fitted.
    """

    spin_isomer: str
    temperature: u.Quantity
    temperature_error: u.Quantity
    amount: u.Quantity
    amount_error: u.Quantity
    intercept: float
    slope: float
    energy_zero: u.Quantity
    partition_function: u.Quantity
    partition_function_kind: str
    lines: tuple


@dataclass(frozen=True)
class PopulationDiagram:
    """A fitted population diagram.

    Attributes
    ----------
    species : str
    spin : str
        ``"joint"`` or ``"separate"`` (as asked; irrelevant for a species without spin isomers).
    temperature, temperature_error : Quantity [K]
        The excitation temperature; NaN for a separate fit of two spin species
        (each has its own in `components`).
    column_density, column_density_error : Quantity [cm^-2]
        Total over all levels (and both spin species); NaN for fluxes in Jy km/s.
    total_number, total_number_error : Quantity [dimensionless]
        Molecules in all levels of an unresolved source; NaN for intensities in K km/s.
    mass, mass_error : Quantity [M_sun]
        ``total_number`` times the mass of one molecule; NaN for K km/s.
    ortho_para_ratio, ortho_para_ratio_error : float
        ``N_ortho / N_para``; NaN without lines of both spin species.
    points : QTable
        One row per line: ``line``, ``species``, ``spin_isomer``, ``E_up`` [K],
        ``g_up``, ``N_u`` and ``N_u_error`` (cm^-2, or a number),
        ``ln(N_u/g_u)`` and ``ln(N_u/g_u)_error``, ``upper_limit``,
        ``ln(N_u/g_u)_model`` (the fitted line there) and ``violates_limit``.
    components : dict of str to PopulationComponent
        ``"ortho"`` and ``"para"``, or ``"all"`` for a species without spin isomers.
    energy_zero : dict of str to Quantity [K]
        The energy zero used for each component.
    chi2 : float
    degrees_of_freedom : int
    method : str
        The formulas used: brightness law, background, optical-depth correction, partition functions.
    undetermined : tuple of str
        What the data cannot determine, one sentence each.
    limit_violations : tuple of str
        Upper limits that the fitted line exceeds.
    notes : tuple of str
    z, magnification : float
    cosmology : str
    """

    species: str
    spin: str
    temperature: u.Quantity
    temperature_error: u.Quantity
    column_density: u.Quantity
    column_density_error: u.Quantity
    total_number: u.Quantity
    total_number_error: u.Quantity
    mass: u.Quantity
    mass_error: u.Quantity
    ortho_para_ratio: float
    ortho_para_ratio_error: float
    points: QTable
    components: dict
    energy_zero: dict
    chi2: float
    degrees_of_freedom: int
    method: str
    undetermined: tuple = ()
    limit_violations: tuple = ()
    notes: tuple = ()
    z: float = 0.0
    magnification: float = 1.0
    cosmology: str = ""
    extra: dict = field(default_factory=dict, repr=False)

    @property
    def reduced_chi2(self):
        """chi^2 per degree of freedom (NaN with none)."""
        return self.chi2 / self.degrees_of_freedom if self.degrees_of_freedom > 0 else float("nan")

    def model(self, E_up, spin_isomer=None):
        """The fitted ``ln(N_u/g_u)`` at energies ``E_up`` [K] of a component (the only one by default).

        Examples
        --------
        >>> import astropy.units as u
        >>> from astropy.table import QTable
        >>> lines = QTable({"line": ["CO J=1-0", "CO J=2-1", "CO J=3-2"],
        ...                 "flux": [1.2, 3.9, 6.1] * u.K * u.km / u.s,
        ...                 "flux_error": [0.1, 0.2, 0.4] * u.K * u.km / u.s})
        >>> population_diagram(lines).model([0, 100] * u.K).round(2)
        array([32.73, 30.63])
        """
        if spin_isomer is None:
            if len(self.components) != 1:
                raise ParameterError(f"this fit has the components {list(self.components)}; pass spin_isomer=")
            spin_isomer = next(iter(self.components))
        if spin_isomer not in self.components:
            raise ParameterError(f"no component {spin_isomer!r}; this fit has {list(self.components)}")
        part = self.components[spin_isomer]
        energy = u.Quantity(E_up, u.K).value
        return part.intercept + part.slope * np.asarray(energy, dtype=float)


# ---------------------------------------------------------------------------
# The fit
# ---------------------------------------------------------------------------

def _weighted_line_fit(design, y, sigma):
    """Parameters and covariance of the weighted least-squares solution of ``design @ p = y``.

    Hand-written normal equations (numpy): the problem has 2-3 parameters, and the covariance
    ``(A^T W A)^-1`` is wanted unscaled (absolute errors), which scipy's curve_fit gives too but at
    many times the cost of a 3x3 solve (tests/benchmarks/bench_population.py).
    """
    weights = 1.0 / sigma**2
    normal = design.T @ (design * weights[:, None])
    covariance = np.linalg.inv(normal)
    params = covariance @ (design.T @ (weights * y))
    residual = (y - design @ params) / sigma
    return params, covariance, float(residual @ residual)


def _design(spins, energy, groups, joint):
    """Design matrix: one intercept column per group, and one shared slope or one slope per group."""
    n = len(energy)
    columns, slopes, intercepts = [], {}, {}
    for g in groups:
        intercepts[g] = len(columns)
        columns.append((spins == g).astype(float))
    if joint:
        for g in groups:
            slopes[g] = len(columns)
        columns.append(energy.copy())
    else:
        for g in groups:
            slopes[g] = len(columns)
            columns.append(np.where(spins == g, energy, 0.0))
    return np.column_stack(columns) if columns else np.zeros((n, 0)), intercepts, slopes


def _background_correction(frequency_ghz, temperature, background, radiation):
    """``ln(1 / (1 - J(T_bg)/J(T)))``: a line seen against a background of T_bg (Goldsmith & Langer 1999,
    with J the Planck brightness temperature, Mangum & Shirley 2015, PASP 127, 266)."""
    if background is None:
        return np.zeros_like(frequency_ghz)
    if radiation == "planck":
        ratio = (planck_temperature(background, frequency_ghz * u.GHz)
                 / planck_temperature(temperature, frequency_ghz * u.GHz))
    else:
        ratio = np.full_like(frequency_ghz, background / temperature)
    with np.errstate(divide="ignore", invalid="ignore"):
        return -np.log1p(-np.asarray(ratio, dtype=float))


def _optical_depths(optical_depth, names):
    if optical_depth is None:
        return np.zeros(len(names))
    wanted = {str(k).strip().lower(): v for k, v in dict(optical_depth).items()}
    unknown = sorted(set(wanted) - {n.lower() for n in names})
    if unknown:
        raise ParameterError(f"optical_depth names lines not in the table: {unknown}; the table has {names}")
    tau = np.array([float(wanted.get(n.lower(), 0.0)) for n in names])
    if np.any(~np.isfinite(tau)) or np.any(tau < 0):
        raise ParameterError(f"optical depths must be finite and >= 0; got {dict(zip(names, tau))}")
    return tau


def _method_text(kind, radiation, background, tau, components, cosmology_name):
    parts = ["population diagram (Goldsmith & Langer 1999), LTE at one temperature"]
    if kind == "brightness":
        parts.append("N_u = 8 pi k nu^2 W / (h c^3 A_ul) from K km/s (column densities)")
    else:
        parts.append(f"N_u = 4 pi D_L^2 S dv / ((1 + z) c h A_ul mu) from Jy km/s ({cosmology_name} cosmology)")
    if np.any(tau > 0):
        parts.append("optical-depth correction C_tau = tau / (1 - exp(-tau)) for the lines given a tau, "
                     "optically thin for the others")
    else:
        parts.append("optically thin")
    if background is None:
        parts.append("no background")
    else:
        law = "Planck J(T)" if radiation == "planck" else "Rayleigh-Jeans"
        parts.append(f"background {background:g} K, N_u / (1 - J(T_bg)/J(T)) with {law}")
    zeros = ", ".join(f"{g}: Q {c.partition_function_kind}, energy zero {c.energy_zero.to_value(u.K):g} K"
                      for g, c in components.items())
    parts.append(zeros)
    return "; ".join(parts)


def _check_choice(value, allowed, name):
    if value not in allowed:
        raise ParameterError(f"unknown {name} {value!r}; choose from {list(allowed)}")
    return value


def _fit_groups(groups, spins, energy, y0, sigma, frequency, joint, background, radiation):
    """Fit, iterating the background correction (which depends on T) to a fixed point."""
    correction = np.zeros_like(y0)
    for _ in range(200):
        design, intercepts, slopes = _design(spins, energy, groups, joint)
        params, covariance, chi2 = _weighted_line_fit(design, y0 + correction, sigma)
        slope_of_row = np.array([params[slopes[s]] for s in spins])
        rising = [g for g in groups if params[slopes[g]] >= 0]
        if rising or background is None:
            break
        new = _background_correction(frequency, -1.0 / slope_of_row, background, radiation)
        if not np.all(np.isfinite(new)):
            raise FitError(
                f"the fitted temperature ({-1 / slope_of_row.max():.3g} K) is below the background "
                f"({background:g} K): the lines would be in absorption; check background_temperature"
            )
        if np.max(np.abs(new - correction)) < 1e-10:
            correction = new
            break
        correction = new
    return params, covariance, chi2, intercepts, slopes, correction, rising


def _log_amount(species, spin, slope, intercept):
    """ln N_s, its derivative by the slope, Q and E_0, for ln(N_u/g_u) = intercept + slope E_up."""
    temperature = -1.0 / slope
    spin_arg = None if spin == "all" else spin
    q, zero, how = spin_partition_function(species, spin_arg, temperature * u.K)
    step = 1e-4 * temperature
    try:  # d ln Q / dT by a central difference, one call for both sides
        down, up = spin_partition_function(species, spin_arg, [temperature - step, temperature + step] * u.K)[0].value
        dlnq_dt = float(np.log(up / down)) / (2 * step)
    except CatalogError:  # at an edge of the table: one-sided
        other = spin_partition_function(species, spin_arg, (temperature - step) * u.K)[0]
        dlnq_dt = float(np.log(q / other)) / step
    e0 = float(zero.to_value(u.K))
    log_n = intercept + float(np.log(q)) + slope * e0
    return log_n, dlnq_dt * temperature**2 + e0, q, zero, how


def population_diagram(lines, *, species=None, spin="joint", z=0.0, magnification=1.0, cosmology=None,
                       region=None, catalog=None, background_temperature=None, radiation="rayleigh-jeans",
                       optical_depth=None):
    """Fit a population diagram to integrated line intensities of one molecule.

    Parameters
    ----------
    lines : Table
        Columns ``line`` (catalog names, e.g. ``"CO J=2-1"``, or a hyperfine
        group's name), ``flux`` and ``flux_error`` (K km/s for a map in
        brightness temperature, Jy km/s for an unresolved source; one unit
        kind for both), optionally ``upper_limit`` (bool; the flux is then the
        limit) and ``region``. The table `measurement_table` writes is valid.
    species : str, optional
        Which species to fit when the table holds several.
    spin : {'joint', 'separate'}
        Ortho and para lines: one temperature and one intercept each, giving
        their ratio (``"joint"``), or one straight line each (``"separate"``).
    z : float
        Source redshift; needed (> 0) for Jy km/s.
    magnification : float
        Lensing magnification the molecule counts are divided by (Jy km/s).
    cosmology : astropy Cosmology or str, optional
        For the luminosity distance; Planck18 by default (as `line_luminosity`).
    region : str, optional
        The region to use when the table holds several.
    catalog : Table, optional
        The line catalog (`load_catalog`), e.g. with a user list of missing Einstein A values.
    background_temperature : Quantity [K], optional
        A background the lines are seen against (e.g. the CMB, 2.725 K (1 + z));
        corrects N_u by ``1 / (1 - J(T_bg)/J(T))``, iterated with the fit. None:
        no background (Goldsmith & Langer's classic form).
    radiation : {'rayleigh-jeans', 'planck'}
        J(T) in that correction: T itself, or the Planck brightness
        temperature. Without a background the two give the same N_u.
    optical_depth : dict of str to float, optional
        Line optical depths tau; each such line's N_u is multiplied by
        ``C_tau = tau / (1 - exp(-tau))`` (Goldsmith & Langer 1999).

    Returns
    -------
    PopulationDiagram

    Raises
    ------
    ParameterError
        Missing columns, several species or regions without a choice, a
        repeated line, a flux <= 0, an error <= 0 or NaN, an unknown option.
    UnitMismatchError
        Fluxes without units, not integrated over the line, or flux and error in different kinds of unit.
    CatalogError
        An unknown line name, or a line without Einstein A or g_up in the catalog.
    RedshiftError
        Jy km/s without a redshift z > 0, or a bad magnification.
    FitError
        No temperature can be determined: fewer detected lines than
        parameters, all at one energy, or points rising with energy.

    References
    ----------
    Goldsmith, P. F. & Langer, W. D. 1999, ApJ 517, 209 (population diagram, C_tau);
    Solomon, P. M. & Vanden Bout, P. A. 2005, ARA&A 43, 677 (line luminosity);
    Mangum, J. G. & Shirley, Y. L. 2015, PASP 127, 266 (Planck brightness temperature).

    Examples
    --------
    >>> import astropy.units as u
    >>> from astropy.table import QTable
    >>> lines = QTable({"line": ["CO J=3-2", "CO J=4-3", "CO J=5-4"],
    ...                 "flux": [2.0, 3.1, 3.6] * u.Jy * u.km / u.s,
    ...                 "flux_error": [0.2, 0.3, 0.4] * u.Jy * u.km / u.s})
    >>> fit = population_diagram(lines, z=3.1, magnification=12)
    >>> fit.temperature.round(1), fit.total_number.unit, fit.mass.unit
    (<Quantity 34.3 K>, Unit(dimensionless), Unit("solMass"))
    """
    spin = _check_choice(spin, SPIN_FITS, "spin")
    radiation = _check_choice(radiation, RADIATION_LAWS, "radiation")
    z = check_redshift(z)
    table = read_line_intensities(lines, region=region, species=species, catalog=catalog)
    species, kind = table.meta["species"], table.meta["kind"]
    names = list(table["line"])
    flux, error, limits = table["flux"], table["flux_error"], np.asarray(table["upper_limit"], dtype=bool)
    background = None
    if background_temperature is not None:
        if not isinstance(background_temperature, u.Quantity) or not background_temperature.unit.is_equivalent(u.K):
            raise UnitMismatchError(f"background_temperature must be a temperature, e.g. 2.725*u.K; got "
                                    f"{background_temperature!r}")
        background = float(background_temperature.to_value(u.K))
        if not np.isfinite(background) or background < 0:
            raise ParameterError(f"background_temperature must be finite and >= 0 K; got {background_temperature}")
    tau = _optical_depths(optical_depth, names)
    c_tau = np.where(tau > 0, tau / -np.expm1(-np.where(tau > 0, tau, 1.0)), 1.0)

    spins = np.array(["all" if s == "none" else s for s in table["spin_isomer"]])
    frequency = table["rest_frequency"].to_value(u.GHz)
    energy = table["E_up"].to_value(u.K)
    g_up = np.asarray(table["g_up"], dtype=float)
    n_u = upper_level_population(flux, table["rest_frequency"], table["einstein_A"], z=z,
                                 magnification=magnification, cosmology=cosmology) * c_tau
    n_u_error = n_u * (error / flux).to_value(u.dimensionless_unscaled)
    y0 = np.log(n_u.value / g_up)
    sigma = (error / flux).to_value(u.dimensionless_unscaled)

    detected = ~limits
    groups = sorted(set(spins[detected].tolist()))
    undetermined, notes = [], []
    joint = spin == "joint" or len(groups) <= 1
    if joint:
        used_groups = groups
        n_params = len(groups) + 1
        spread = any(len(set(energy[detected & (spins == g)])) >= 2 for g in groups)
        if int(detected.sum()) < n_params or not spread:
            counts = {g: [n for n, s, d in zip(names, spins, detected) if s == g and d] for g in groups}
            raise FitError(
                f"{species}: the detected lines {counts} cannot determine a temperature: a straight line needs two "
                "detected lines at different E_up (of one spin species, or in a joint fit one more line of either "
                "spin species); add a line, or fix the temperature and use lte_spectrum"
            )
    else:
        used_groups = []
        for g in groups:
            here = [n for n, s, d in zip(names, spins, detected) if s == g and d]
            if len(set(energy[detected & (spins == g)])) >= 2:
                used_groups.append(g)
            else:
                undetermined.append(f"{g} {species}: temperature and amount (only {len(here)} detected line "
                                    f"{here}; a separate fit needs two at different E_up)")
        if not used_groups:
            raise FitError(f"{species}: no spin species has two detected lines at different E_up; "
                           f"{'; '.join(undetermined)}. Try spin='joint'")
    used = detected & np.isin(spins, used_groups)
    params, covariance, chi2, intercepts, slopes, correction, rising = _fit_groups(
        used_groups, spins[used], energy[used], y0[used], sigma[used], frequency[used], joint, background,
        radiation)
    if rising:
        raise FitError(
            f"{species}: ln(N_u/g_u) rises with E_up for {rising} (slope > 0), so no positive excitation "
            "temperature fits: the levels are not in LTE, a line is optically thick, or a flux is wrong"
        )
    dof = int(used.sum()) - len(params)
    if dof == 0:
        undetermined.append(f"goodness of fit: {int(used.sum())} detected lines for {len(params)} parameters leave "
                            "no degree of freedom, so whether one temperature describes the levels is untested "
                            "(a third line would test it)")

    components, log_amounts, gradients, energy_zero = {}, {}, {}, {}
    unit = n_u.unit * u.dimensionless_unscaled
    for g in used_groups:
        a, b = params[intercepts[g]], params[slopes[g]]
        t = -1.0 / b
        t_err = float(np.sqrt(covariance[slopes[g], slopes[g]])) * t**2
        try:
            log_n, dlogn_db, q, zero, how = _log_amount(species, g, b, a)
        except CatalogError as exc:
            undetermined.append(f"{g} amount: {exc}")
            q, zero, how, log_n = np.nan * u.one, np.nan * u.K, "", np.nan
            dlogn_db = np.nan
        grad = np.zeros(len(params))
        grad[intercepts[g]], grad[slopes[g]] = 1.0, dlogn_db
        amount = np.exp(log_n)
        amount_err = amount * float(np.sqrt(grad @ covariance @ grad))
        lines_used = tuple(n for n, s, k in zip(names, spins, used) if s == g and k)
        components[g] = PopulationComponent(g, t * u.K, t_err * u.K, amount * unit, amount_err * unit, float(a),
                                            float(b), zero, q, how, lines_used)
        log_amounts[g], gradients[g], energy_zero[g] = log_n, grad, zero
        if how.startswith("high-temperature"):
            notes.append(f"{g} {species}: Q is the {how} (Q_total / {STATISTICAL_ORTHO_PARA[species] + 1:g}), "
                         "counted from the molecule's ground level; at low temperature the ortho-to-para ratio "
                         "derived with it is too low")

    total = total_err = np.nan
    missing = [g for g in groups if g not in used_groups]
    spin_species = [g for g in groups if g != "all"]
    all_spins = {"ortho", "para"} if spin_species else {"all"}
    if missing or not all_spins <= set(used_groups):
        absent = sorted(all_spins - set(used_groups))
        undetermined.append(f"total amount over both spin species: no determined {absent} component; "
                            "components[...] holds each determined spin species' amount")
    elif all(np.isfinite(log_amounts[g]) for g in used_groups):
        amounts = {g: np.exp(log_amounts[g]) for g in used_groups}
        total = sum(amounts.values())
        grad = sum(amounts[g] * gradients[g] for g in used_groups)
        total_err = float(np.sqrt(grad @ covariance @ grad))
    ratio = ratio_err = np.nan
    if {"ortho", "para"} <= set(used_groups):
        ratio = float(np.exp(log_amounts["ortho"] - log_amounts["para"]))
        grad = gradients["ortho"] - gradients["para"]
        ratio_err = ratio * float(np.sqrt(grad @ covariance @ grad))
    elif spin_species:
        undetermined.append(f"ortho-to-para ratio: the fit has no determined {sorted({'ortho', 'para'} - set(used_groups))} "
                            "component")

    if joint:
        temperature, temperature_err = components[used_groups[0]].temperature, components[used_groups[0]].temperature_error
    else:
        temperature, temperature_err = np.nan * u.K, np.nan * u.K
        notes.append("separate fits: each spin species' temperature is in components[...].temperature")

    mass = mass_err = np.nan * u.M_sun
    if kind == "flux":
        column, column_err = np.nan / u.cm**2, np.nan / u.cm**2
        number, number_err = total * u.one, total_err * u.one
        try:
            m = molecular_mass(species)
            mass, mass_err = (total * m).to(u.M_sun), (total_err * m).to(u.M_sun)
        except CatalogError as exc:
            undetermined.append(f"mass: {exc}")
    else:
        column, column_err = total * unit, total_err * unit
        number, number_err = np.nan * u.one, np.nan * u.one
        if check_magnification(magnification) != 1.0:
            notes.append("magnification divides molecule counts from fluxes in Jy km/s; it was not used for K km/s")

    # The points, the fitted line at each, and the upper limits against it.
    model = np.full(len(names), np.nan)
    limit_correction = np.zeros(len(names))
    for g in used_groups:
        here = spins == g
        model[here] = params[intercepts[g]] + params[slopes[g]] * energy[here]
        if background is not None:
            limit_correction[here] = _background_correction(frequency[here], components[g].temperature.value,
                                                            background, radiation)
    y = y0 + limit_correction
    y[used] = y0[used] + correction
    violates = limits & np.isfinite(model) & (model > y)
    violations = tuple(n for n, v in zip(names, violates) if v)
    if violations:
        notes.append(f"the fitted line lies above the upper limit(s) {list(violations)}: the fit and the limits "
                     "disagree (another temperature, or the limit's line is fainter than LTE predicts)")
    factor = np.exp(y - y0)
    points = QTable({
        "line": names, "species": [species] * len(names), "spin_isomer": table["spin_isomer"],
        "E_up": energy * u.K, "g_up": g_up, "N_u": n_u * factor, "N_u_error": n_u_error * factor,
        _LN: y, f"{_LN}_error": np.where(limits, np.nan, sigma), "upper_limit": limits,
        f"{_LN}_model": model, "violates_limit": violates,
    })
    cosmology_name = ""
    if kind == "flux":
        cosmology_name = getattr(get_cosmology(cosmology), "name", None) or repr(cosmology)
    method = _method_text(kind, radiation, background, tau, components, cosmology_name)
    points.meta.update({"species": species, "quantity": "column density" if kind == "brightness" else "number",
                        "method": method, "energy_zero_K": {g: float(e.to_value(u.K)) for g, e in energy_zero.items()}})
    return PopulationDiagram(
        species=species, spin=spin, temperature=temperature, temperature_error=temperature_err,
        column_density=column, column_density_error=column_err, total_number=number,
        total_number_error=number_err, mass=mass, mass_error=mass_err, ortho_para_ratio=ratio,
        ortho_para_ratio_error=ratio_err, points=points, components=components, energy_zero=energy_zero,
        chi2=chi2, degrees_of_freedom=dof, method=method, undetermined=tuple(undetermined),
        limit_violations=violations, notes=tuple(notes), z=z,
        magnification=float(magnification) if kind == "flux" else 1.0, cosmology=cosmology_name,
    )
