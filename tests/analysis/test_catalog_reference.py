"""The bundled transition catalog against published line data.

tests/data/catalog_reference.ecsv holds numbers copied by hand from published
files (LAMDA molecular data files, Schoier et al. 2005, A&A 432, 369; the
laboratory water line list of the Rosenkranz absorption model; PyNeb's copies
of Froese Fischer & Tachiev 2004, Galavis et al. 1998 and NIST level
energies), each row naming the public copy read and the publication. The tests
here fail when a future edit of the catalog drifts from those numbers, and when
a catalog row claims a published source that the reference table does not back.

Most rows of the grown catalog (issue 15) come from LAMDA files whose level and
line sections are vendored in analysis/data/sources/lamda/ (each naming the
public copy read); a value credited to such a file is checked here against
that file, read by this test's own small parser.
"""

import re
from pathlib import Path

import astropy.units as u
import numpy as np
import pytest
from astropy.table import Table

from cubeloupe.analysis import collapse_hyperfine, load_catalog

REFERENCE_PATH = Path(__file__).parents[1] / "data" / "catalog_reference.ecsv"
VENDORED = Path(__file__).parents[2] / "analysis" / "data" / "sources" / "lamda"

# Comparison limits asked of the catalog (the acceptance rule): frequency within the
# published precision (per row, in the table), E_up/k within 0.1 K, Einstein A within 1 %.
E_UP_TOLERANCE = 0.1  # K
A_RTOL = 0.01

# Provenance clauses that describe a computation rather than a copied number.
DERIVED = ("h nu/k", "rigid rotor", "fitted", "level energies from the same constants", "symmetric-top formula",
           "Rydberg formula", "component offsets", "upper level's energy in the level list",
           "weighted mean of the hyperfine components")
# (the CH3CN centres, weighted means of the JPL components, are checked in test_ch3cn_centres_*)
SPLATALOGUE = VENDORED.parent / "splatalogue_rows.txt"


def read_splatalogue():
    """The vendored catalogue rows as arrays (nu [GHz], E_up [K], A [s^-1]), read as the file prints them."""
    cells = [line.split("\t") for line in SPLATALOGUE.read_text().splitlines() if not line.startswith("#")]
    nu = np.array([float(c[3]) for c in cells]) / 1e3
    a = np.array([10 ** float(c[5]) if c[5] != "None" else np.nan for c in cells])
    return nu, np.array([float(c[7]) for c in cells]), a
# (an E_up read from a LAMDA file's level list is checked in test_nh3_e_up_is_the_upper_level_energy)
QUANTITIES = {"nu": "rest_frequency", "E_up": "E_up", "A": "einstein_A"}


def _reference():
    table = Table.read(REFERENCE_PATH, format="ascii.ecsv")
    table["note"] = [str(n) if n is not np.ma.masked else "" for n in table["note"]]
    return table


REFERENCE = _reference()


def _by_name(table):
    # Rows by name, and each hyperfine group collapsed to one row under the group's name
    # (the published hyperfine-free values the reference table holds for HCN J=1-0).
    out = {str(name): row for name, row in zip(table["name"], table)}
    grouped = table[np.asarray(table["hyperfine_group"], dtype=str) != ""]
    out.update({str(name): row for name, row in zip(collapse_hyperfine(grouped)["name"],
                                                     collapse_hyperfine(grouped))})
    return out


@pytest.fixture(scope="module")
def catalog():
    return _by_name(load_catalog())


def _name(row):
    return f"{row['species']} {row['transition']}"


def _row_id(row):
    copy = row["source"].split("@")[0].split("/")[-1]
    return f"{_name(row)} [{copy}]"


def _finite(value):
    return bool(np.isfinite(value))


def mismatches(catalog, reference):
    """Human-readable differences between catalog rows and published reference rows."""
    problems = []
    for ref in reference:
        name = _name(ref)
        if name not in catalog:
            problems.append(f"{name}: not in the catalog")
            continue
        row = catalog[name]
        if _finite(ref["rest_frequency"]):
            diff = abs(row["rest_frequency"].to_value(u.MHz) - ref["rest_frequency"] * 1e3)
            if diff > ref["frequency_tolerance"]:
                problems.append(f"{name}: rest frequency {row['rest_frequency']} is {diff:.4g} MHz from "
                                f"{ref['rest_frequency']} GHz ({ref['source']}), more than "
                                f"{ref['frequency_tolerance']} MHz")
        if _finite(ref["E_up"]):
            diff = abs(row["E_up"].to_value(u.K) - ref["E_up"])
            if not diff <= E_UP_TOLERANCE:
                problems.append(f"{name}: E_up {row['E_up']} differs from {ref['E_up']} K ({ref['source']})")
        if _finite(ref["einstein_A"]):
            value = row["einstein_A"].to_value(1 / u.s)
            if not abs(value / ref["einstein_A"] - 1) <= A_RTOL:
                problems.append(f"{name}: Einstein A {value:.4g} /s differs from {ref['einstein_A']:.4g} /s "
                                f"({ref['source']}) by more than 1 %")
    return problems


# ---------------------------------------------------------------------------
# The reference table itself
# ---------------------------------------------------------------------------

def test_reference_rows_name_their_source_and_carry_a_value():
    for ref in REFERENCE:
        assert re.search(r"\S+/\S+ \S+@[0-9a-f]{7}", ref["source"]), ref["source"]
        assert len(ref["publication"]) > 10, _name(ref)
        assert any(_finite(ref[col]) for col in ("rest_frequency", "E_up", "einstein_A")), _name(ref)
        if _finite(ref["rest_frequency"]):
            assert 0 < ref["frequency_tolerance"], _name(ref)
            # Wider than a printed digit only with a stated reason.
            assert ref["frequency_tolerance"] < 0.1 or ref["note"], _name(ref)


# ---------------------------------------------------------------------------
# Catalog against published numbers
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("ref", [r for r in REFERENCE if _finite(r["rest_frequency"])], ids=_row_id)
def test_rest_frequency_within_published_precision(catalog, ref):
    row = catalog[_name(ref)]
    diff = abs(row["rest_frequency"].to_value(u.MHz) - ref["rest_frequency"] * 1e3)
    assert diff <= ref["frequency_tolerance"], (diff, ref["source"])


@pytest.mark.parametrize("ref", [r for r in REFERENCE if _finite(r["E_up"])], ids=_row_id)
def test_upper_energy_within_0p1_kelvin(catalog, ref):
    row = catalog[_name(ref)]
    assert abs(row["E_up"].to_value(u.K) - ref["E_up"]) <= E_UP_TOLERANCE, ref["source"]


@pytest.mark.parametrize("ref", [r for r in REFERENCE if _finite(r["einstein_A"])], ids=_row_id)
def test_einstein_a_within_one_percent(catalog, ref):
    row = catalog[_name(ref)]
    assert row["einstein_A"].to_value(1 / u.s) == pytest.approx(ref["einstein_A"], rel=A_RTOL), ref["source"]


def test_drift_from_published_values_is_caught():
    # The comparison must notice an edit that moves a value just past its limit.
    table = load_catalog()
    assert mismatches(_by_name(table), REFERENCE) == []
    i = list(table["name"]).index("CO J=1-0")
    table["rest_frequency"][i] += 0.2 * u.kHz   # LAMDA prints 115.2712018 GHz: 0.1 kHz precision
    table["E_up"][i] += 0.15 * u.K
    table["einstein_A"][i] *= 1.02
    problems = mismatches(_by_name(table), REFERENCE)
    assert len(problems) == 3 and all(p.startswith("CO J=1-0:") for p in problems), problems


# ---------------------------------------------------------------------------
# Provenance claims against the reference table
# ---------------------------------------------------------------------------

def _clauses(provenance):
    """{quantity: clause text} from 'nu, E_up, A: text; ...' provenance strings."""
    out = {}
    for clause in provenance.split("; "):
        keys, _, text = clause.partition(": ")
        for key in keys.split(", "):
            out[re.sub(r"\s*\(.*?\)", "", key).strip()] = text
    return out


def _copies(ref):
    return [part.split("@")[0] for part in ref["source"].split(" and ")]


def read_vendored(name):
    """Lines of a vendored LAMDA file as arrays (nu [GHz], E_up [K], A [s^-1])."""
    text = (VENDORED / name).read_text().splitlines()
    for k, line in enumerate(text):
        if line.strip().startswith("!") and "RADIATIVE" in line.upper() and "NUMBER" in line.upper():
            count = int(text[k + 1].split()[0])
            values = np.array([[float(v) for v in row.split()[3:6]] for row in text[k + 3:k + 3 + count]])
            return values[:, 1], values[:, 2], values[:, 0]
    raise AssertionError(f"{name}: no radiative section")


def _vendored_file(text):
    match = re.search(r"file (\S+\.dat), copy in", text)
    return match.group(1) if match and (VENDORED / match.group(1)).exists() else None


def test_vendored_files_name_their_copy():
    files = sorted(VENDORED.glob("*.dat"))
    assert len(files) >= 25
    for path in files:
        first = path.read_text().splitlines()[0]
        assert first.startswith("# copy read: ") and ("PyPI wheel" in first or "GitHub" in first), path.name


@pytest.mark.parametrize("name", sorted(str(n) for n in load_catalog()["name"]))
def test_each_value_is_backed_or_marked(catalog, name):
    # Every known value says where it comes from; a value not recalled and not derived
    # must match a reference row taken from the very copy its provenance names.
    row = catalog[name]
    clauses = _clauses(str(row["provenance"]))
    refs = [r for r in REFERENCE if _name(r) == name]
    for key, column in QUANTITIES.items():
        if not _finite(row[column].value):
            continue
        assert key in clauses, f"{name}: provenance says nothing about {key}: {row['provenance']!r}"
        text = clauses[key]
        if "from memory" in text or any(word in text for word in DERIVED):
            continue
        if "splatalogue.db" in text:
            # A value copied from the vendored Splatalogue rows: nu to 1 kHz, E_up to 0.006 K, A to 0.1 %.
            nu, e_up, a = read_splatalogue()
            value = row[column].value
            printed = {"rest_frequency": (nu, 1e-6), "E_up": (e_up, 0.006), "einstein_A": (a, 1e-3 * value)}
            column_values, tolerance = printed[column]
            assert np.any(np.abs(column_values - value) <= tolerance), (name, key, value, "splatalogue rows")
            continue
        vendored = _vendored_file(text)
        if vendored:
            # The value must be one the named LAMDA file prints (nu to 1 kHz, E_up to its
            # printed 0.01 K, A to 0.1 %).
            nu, e_up, a = read_vendored(vendored)
            value = row[column].value
            printed = {"rest_frequency": (nu, 1e-6), "E_up": (e_up, 0.006), "einstein_A": (a, 1e-3 * value)}
            column_values, tolerance = printed[column]
            assert np.any(np.abs(column_values - value) <= tolerance), (name, key, value, vendored)
            continue
        backing = [r for r in refs if _finite(r[column]) and any(copy in text for copy in _copies(r))]
        assert backing, f"{name}: {key} is credited to {text!r} but no reference row from that copy holds it"


def test_nh3_e_up_is_the_upper_level_energy():
    catalog = load_catalog()
    # LAMDA p-nh3.dat (vendored copy): the (1,1) and (2,2) upper inversion levels at 16.169963295 and
    # 44.793901871 cm^-1 above the molecule's ground; hc/k = 1.4387769 K cm (CODATA 2018)
    for group, level in (("NH3 (J,K)=(1,1)", 16.169963295), ("NH3 (J,K)=(2,2)", 44.793901871)):
        rows = catalog[np.asarray(catalog["hyperfine_group"]) == group]
        assert np.allclose(rows["E_up"].to_value(u.K), level * 1.4387769, atol=0.006)


def test_ch3cn_centres_lie_among_their_published_components():
    # Each CH3CN (J, K) line of the catalog is the g A-weighted centroid of the 14N hyperfine components
    # of the JPL entry (vendored Splatalogue rows): it must lie within the components' span, and the
    # strong components (F=J-1..J+1 -> F-1) lie within 0.1 MHz of each other (Pickett et al. 1998 entry).
    cells = [line.split("\t") for line in SPLATALOGUE.read_text().splitlines()
             if not line.startswith("#") and line.startswith("606\t")]
    spans = {}
    for c in cells:
        match = re.match(r"\s*(\d+)\(\s*(\d+)\)-", c[4])
        spans.setdefault((int(match.group(1)), int(match.group(2))), []).append(float(c[3]))
    catalog = load_catalog()
    rows = catalog[np.asarray(catalog["species"]) == "CH3CN"]
    assert len(rows) > 100
    for row in rows:
        j, k = (int(v) for v in re.match(r"J=(\d+)-\d+ K=(\d+)", str(row["transition"])).groups())
        nu = row["rest_frequency"].to_value(u.MHz)
        assert min(spans[(j, k)]) <= nu <= max(spans[(j, k)]), row["name"]
