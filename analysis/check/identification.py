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

from dataclasses import dataclass

import astropy.units as u
import numpy as np

from ..catalog import find_line, lines_in_band
from ..errors import CubeloupeError
from ..redshift_solver import redshift_candidates
from ..spectral import SPEED_OF_LIGHT, velocity
from .results import Candidate, ExpectedLine

__all__ = [
    "IDENTIFY_TOLERANCE",
    "MAX_CANDIDATES",
    "MAX_SOLVER_FEATURES",
    "candidates_at_z",
    "ONE_LINE_SPREAD",
    "MIN_SPREAD_TOLERANCES",
    "LOCAL_LINE_TOLERANCE",
    "LOCAL_VELOCITY_LIMIT",
    "Identification",
    "identify_features",
    "local_line",
    "redshift_constraint",
    "lone_candidates",
    "expected_lines",
]

_KMS = u.km / u.s
# The redshift solver pairs every feature with every catalog line: only the
# strongest features are given to it.
MAX_SOLVER_FEATURES = 8
# Redshifts asked of the solver: enough to list every one that fits two detections equally well.
MAX_SOLUTIONS = 100

# A catalog line is a tentative identification of a feature when the line,
# redshifted to z, lies within half the feature's width plus this velocity of
# the feature's centroid: redshifts typed from an optical spectrum are often
# off by a few hundred km/s (common practice).
IDENTIFY_TOLERANCE = 300 * _KMS
# How many tentative identifications are kept per feature.
MAX_CANDIDATES = 5
# A redshift is solved from two or more detections only when they span at least this much
# (one line can cover less: the two horns of a rotating disk span up to ~600 km/s, a hyperfine
# group a few tens of km/s; common practice) and at least this many matching tolerances.
ONE_LINE_SPREAD = 700 * _KMS
MIN_SPREAD_TOLERANCES = 5
# The header's rest frequency names the line a cube was tuned to when it is a catalog line (headers carry
# the catalog value to 7 digits or more: a rest frequency that only lies near a catalog line, such as
# the sky frequency of a redshifted line, names none)
# within this velocity, and the strongest detection lies within LOCAL_VELOCITY_LIMIT of it
# (a galaxy of the local universe, z < 0.05).
LOCAL_LINE_TOLERANCE = 0.1 * _KMS
LOCAL_VELOCITY_LIMIT = 15000 * _KMS


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


@dataclass(frozen=True)
class Identification:
    """Identifications of a cube's detections.

    Attributes
    ----------
    candidates : list of tuple of Candidate
        Per feature, best first.
    solved_z : float or None
        Redshift solved from two or more detections (only when they constrain it).
    local_z : float or None
        Redshift from the velocity axis: the header's rest frequency (a
        catalog line) moved to the strongest detection.
    local_line : str or None
        The catalog line at the header's rest frequency.
    redshift_note : str or None
        Why no redshift was solved from two or more detections, in words.
    redshift_options : tuple of (float, tuple of str)
        When several redshifts fit the detections equally well: each z and
        the lines it gives the detections (None for one it leaves
        unidentified), lowest-lying lines first.
    """

    candidates: list
    solved_z: object = None
    local_z: object = None
    local_line: object = None
    redshift_note: object = None
    redshift_options: tuple = ()


def local_line(rest_frequency):
    """The catalog line at ``rest_frequency`` (within ``LOCAL_LINE_TOLERANCE``), or None."""
    if rest_frequency is None:
        return None
    rest = u.Quantity(rest_frequency, u.GHz)
    margin = float(LOCAL_LINE_TOLERANCE / SPEED_OF_LIGHT)
    rows = lines_in_band(rest * (1 - margin), rest * (1 + margin), 0.0)
    if len(rows) == 0:
        return None
    nearest = int(np.argmin(np.abs(u.Quantity(rows["rest_frequency"], u.GHz) - rest)))
    return str(rows["name"][nearest])


def redshift_constraint(frequencies, tolerance):
    """Why the detections at ``frequencies`` cannot constrain a redshift, or None when they can.

    Rule: a redshift is solved from two or more detections only when their
    frequencies spread over at least ``ONE_LINE_SPREAD`` in velocity (less,
    one line could explain them all: the two peaks of a rotating disk, the
    components of one hyperfine group, or one line at two velocities) and at
    least ``MIN_SPREAD_TOLERANCES`` times the matching tolerance (less, any
    catalog pair with about the same frequency ratio fits as well: the
    ratios cannot tell the candidates apart).
    """
    f = u.Quantity(frequencies).to_value(u.GHz)
    spread = SPEED_OF_LIGHT * float((f.max() - f.min()) / np.mean(f))
    fraction = float((f.max() - f.min()) / np.mean(f))
    needed = max(ONE_LINE_SPREAD, MIN_SPREAD_TOLERANCES * u.Quantity(tolerance, _KMS))
    if spread >= needed:
        return None
    why = ("one line or one hyperfine group could explain them" if spread < ONE_LINE_SPREAD
           else "their frequency ratios cannot tell catalog lines apart")
    return (f"redshift not constrained by this band: the {len(f)} detections span only "
            f"{spread.to_value(_KMS):.0f} km/s (a fractional bandwidth of {fraction:.1e}), so {why} "
            f"(a redshift needs detections at least {needed.to_value(_KMS):.0f} km/s apart)")


def identify_features(frequencies, widths, z, channel_velocity, *, rest_frequency=None):
    """Tentative identifications per feature, and the redshift they imply when none was given.

    With ``z``: catalog lines near each feature at that z (`candidates_at_z`).
    Without ``z``:

    * when the header gives a rest frequency at a catalog line (the line the
      observation was tuned to) and the strongest feature lies within
      ``LOCAL_VELOCITY_LIMIT`` of it, the local identification comes first:
      ``local_z`` puts that line on the strongest feature (the z of the
      velocity axis), and each feature gets the catalog lines near it at
      ``local_z``;
    * with two or more features whose frequencies constrain a redshift
      (`redshift_constraint`), the redshift solver's best candidate that
      identifies at least two of the (up to ``MAX_SOLVER_FEATURES``)
      strongest features gives ``solved_z`` and the lines it assigns;
    * otherwise each feature is a lone one: every line that puts it at a
      redshift from 0 to 20, lowest upper-level energy first (the solver's
      ranking of a lone peak), after any local identification.

    Returns
    -------
    Identification
    """
    n = len(frequencies)
    if n == 0:
        return Identification([])
    if z is not None:
        return Identification([candidates_at_z(f, w / 2, z) for f, w in zip(frequencies, widths)])
    # The solver's tolerance must cover the centroid's uncertainty: at least
    # 150 km/s (the solver's default) and at least two channels.
    tolerance = max(150 * _KMS, 2 * channel_velocity) if channel_velocity is not None else 150 * _KMS
    peaks = u.Quantity(frequencies).to(u.GHz)
    per_feature = [[] for _ in range(n)]
    local_z, line = None, local_line(rest_frequency)
    if line is not None:
        offset = velocity(peaks[0], u.Quantity(rest_frequency, u.GHz))
        if abs(offset) <= LOCAL_VELOCITY_LIMIT:
            local_z = float((u.Quantity(rest_frequency, u.GHz) / peaks[0]).decompose()) - 1.0
            per_feature = [list(candidates_at_z(f, w / 2, local_z)) for f, w in zip(peaks, widths)]
    note = redshift_constraint(peaks, tolerance) if n >= 2 else None
    solved, options = None, ()
    if n >= 2 and note is None:
        solved, note, options = _solve(peaks, widths, tolerance, per_feature)
    for i in range(n):
        if solved is None and i < MAX_SOLVER_FEATURES and len(per_feature[i]) < MAX_CANDIDATES:
            known = {c.name for c in per_feature[i]}
            per_feature[i].extend(c for c in lone_candidates(peaks[i], tolerance) if c.name not in known)
    if local_z is not None and note is not None:
        note += f"; the header's rest frequency ({line}) places the strongest detection at z = {local_z:.5f}"
    return Identification([tuple(c[:MAX_CANDIDATES]) for c in per_feature], solved_z=solved, local_z=local_z,
                          local_line=line if local_z is not None else None, redshift_note=note,
                          redshift_options=options)


def _equally_good(solutions, tolerance):
    """The solutions that fit the detections best and equally well, lines of lowest upper-level energy first.

    The solutions identifying the most detections, with every residual
    within the matching tolerance, fit the data equally well (the solver's
    order among them hangs on the noise of the measured frequencies). They
    are ordered by the summed upper-level energies of their lines, lowest
    (usually the brightest lines) first: the solver's own last criterion.
    """
    if not solutions:
        return []
    most = max(s.n_identified for s in solutions)
    limit = u.Quantity(tolerance, _KMS).value

    def fits(solution):
        residuals = np.abs(solution.residuals.to_value(_KMS))
        return solution.n_identified == most and bool(np.all(residuals[np.isfinite(residuals)] <= limit))

    def energy(solution):
        return sum(float(u.Quantity(find_line(name)["E_up"]).to_value(u.K)) for name in solution.lines if name)

    return sorted((s for s in solutions if fits(s)), key=energy)


def _solve(peaks, widths, tolerance, per_feature):
    """The redshift the strongest detections fix, or why they fix none; their identifications go into ``per_feature``.

    Returns
    -------
    solved : float or None
    note : str or None
        When several redshifts fit equally well: they are listed, and the
        redshift is not solved (the data do not tell them apart).
    options : tuple
        Those redshifts (see `Identification` ``redshift_options``).
    """
    n_used = min(len(peaks), MAX_SOLVER_FEATURES)
    try:
        solutions = redshift_candidates(peaks[:n_used], tolerance=tolerance, z_range=(0.0, 20.0),
                                        max_candidates=MAX_SOLUTIONS)
    except CubeloupeError:
        return None, None, ()
    good = _equally_good([s for s in solutions if s.unique], tolerance)
    if not good:
        return None, "redshift not solved: no redshift of the catalog's lines fits two of the detections", ()
    for solution in good:
        for i, name in enumerate(solution.lines):
            if name is None or any(c.name == name for c in per_feature[i]):
                continue
            per_feature[i].append(Candidate(name, solution.rest_frequencies[i], float(solution.z),
                                            solution.residuals[i]))
    if len(good) > 1:
        options = "; ".join(f"z = {s.z:.4f} ({', '.join(n for n in s.lines if n)})" for s in good[:4])
        note = (f"redshift not constrained by this band: {len(good)} redshifts fit the detections equally well "
                f"(within {u.Quantity(tolerance, _KMS).value:.0f} km/s), lowest-lying lines first: "
                f"{options}{'; ...' if len(good) > 4 else ''}")
        return None, note, tuple((float(s.z), tuple(s.lines)) for s in good)
    solved = good[0].z
    for i in range(len(peaks)):
        if not per_feature[i]:
            # features the solver did not see (or could not place) are identified at the solved z
            per_feature[i] = list(candidates_at_z(peaks[i], widths[i] / 2, solved))
    return float(solved), None, ()


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
