"""Tentative identifications of the check's detections with catalog lines, and the redshift they imply.

With a redshift given, each detection gets the catalog lines near it at that
z (`candidates_at_z`); without one, the redshift solver
(`redshift_solver.redshift_candidates`) is asked for a z that explains two or
more detections (`identify_features`); `expected_lines` lists the catalog
lines that fall in the band at z.

Examples
--------
>>> [c.name for c in candidates_at_z(230.538 * u.GHz, 10 * u.km / u.s, 0.0)][:1]
['CO J=2-1']
"""

import astropy.units as u

from ..catalog import lines_in_band
from ..errors import CubeloupeError
from ..redshift_solver import redshift_candidates
from ..spectral import SPEED_OF_LIGHT, velocity
from .results import Candidate, ExpectedLine

__all__ = [
    "IDENTIFY_TOLERANCE",
    "MAX_CANDIDATES",
    "MAX_SOLVER_FEATURES",
    "candidates_at_z",
    "identify_features",
    "lone_candidates",
    "expected_lines",
]

_KMS = u.km / u.s
# The redshift solver pairs every feature with every catalog line: only the
# strongest features are given to it.
MAX_SOLVER_FEATURES = 8

# A catalog line is a tentative identification of a feature when the line,
# redshifted to z, lies within half the feature's width plus this velocity of
# the feature's centroid: redshifts typed from an optical spectrum are often
# off by a few hundred km/s (common practice).
IDENTIFY_TOLERANCE = 300 * _KMS
# How many tentative identifications are kept per feature.
MAX_CANDIDATES = 5


def candidates_at_z(frequency, half_width, z):
    """Catalog lines near ``frequency`` at redshift ``z``, nearest first."""
    tolerance = (half_width + IDENTIFY_TOLERANCE).to_value(_KMS) / SPEED_OF_LIGHT.to_value(_KMS)
    band = lines_in_band(frequency * (1 - tolerance), frequency * (1 + tolerance), z)
    found = []
    for row in band:
        rest = row["rest_frequency"] * u.GHz if not hasattr(row["rest_frequency"], "unit") else row["rest_frequency"]
        rest = u.Quantity(rest, u.GHz)
        offset = velocity(frequency, rest, z=z)
        found.append(Candidate(str(row["name"]), rest, float(z), offset))
    found.sort(key=lambda c: abs(c.velocity_offset.to_value(_KMS)))
    return tuple(found[:MAX_CANDIDATES])


def identify_features(frequencies, widths, z, channel_velocity):
    """Tentative identifications per feature, and a solved z when none was given.

    With ``z``: catalog lines near each feature at that z (`candidates_at_z`).
    Without ``z`` and with two or more features: the redshift solver's best
    candidate that identifies at least two of the (up to
    ``MAX_SOLVER_FEATURES``) strongest features gives ``solved_z``; each
    feature's identifications are the lines the solver's candidates assign
    to it, best candidate first, or else the catalog lines near it at the
    solved z; when no redshift fits two features, each of them is treated as
    a lone feature. A lone feature (also the only one): every line that puts
    it at a redshift from 0 to 20, lowest upper-level energy first (the
    solver's ranking of a lone peak).
    """
    n = len(frequencies)
    if n == 0:
        return [], None
    if z is not None:
        return [candidates_at_z(f, w / 2, z) for f, w in zip(frequencies, widths)], None
    # The solver's tolerance must cover the centroid's uncertainty: at least
    # 150 km/s (the solver's default) and at least two channels.
    tolerance = max(150 * _KMS, 2 * channel_velocity) if channel_velocity is not None else 150 * _KMS
    # features come strongest first; the solver sees the strongest few
    n_used = min(n, MAX_SOLVER_FEATURES)
    peaks = u.Quantity(frequencies[:n_used]).to(u.GHz)
    try:
        solutions = redshift_candidates(peaks, tolerance=tolerance, z_range=(0.0, 20.0), max_candidates=10)
    except CubeloupeError:
        solutions = []
    solved = None
    if n >= 2:
        unique = [s for s in solutions if s.unique]
        solved = unique[0].z if unique else None
        per_feature = [[] for _ in range(n)]
        for solution in unique:
            for i, name in enumerate(solution.lines):
                if name is None or any(c.name == name for c in per_feature[i]):
                    continue
                per_feature[i].append(Candidate(name, solution.rest_frequencies[i], float(solution.z),
                                                solution.residuals[i]))
        for i in range(n):
            if per_feature[i]:
                continue
            if solved is not None:
                # features the solver did not see (or could not place) are identified at the solved z
                per_feature[i] = list(candidates_at_z(frequencies[i], widths[i] / 2, solved))
            elif i < n_used:
                # no redshift fits two features (e.g. one line at two velocities): each on its own
                per_feature[i] = list(lone_candidates(peaks[i], tolerance))
        return [tuple(c[:MAX_CANDIDATES]) for c in per_feature], solved
    return [tuple(lone_candidates(peaks[0], tolerance, solutions))], None


def lone_candidates(frequency, tolerance, solutions=None):
    """Every catalog line that puts one feature at 0 <= z <= 20, as the solver ranks a lone peak."""
    if solutions is None:
        try:
            solutions = redshift_candidates(u.Quantity([frequency]), tolerance=tolerance, z_range=(0.0, 20.0),
                                            max_candidates=MAX_CANDIDATES)
        except CubeloupeError:
            solutions = []
    lone = [Candidate(s.lines[0], s.rest_frequencies[0], float(s.z), None) for s in solutions if s.lines[0]]
    return lone[:MAX_CANDIDATES]




def expected_lines(band, z, features):
    """The catalog lines inside ``band`` (low, high) at redshift ``z``, each marked when a feature was identified with it."""
    names_found = {c.name for f in features for c in f.candidates}
    return tuple(
        ExpectedLine(str(row["name"]), u.Quantity(row["rest_frequency"], u.GHz),
                     u.Quantity(row["observed_frequency"], u.GHz), str(row["name"]) in names_found)
        for row in lines_in_band(band[0], band[1], z)
    )
