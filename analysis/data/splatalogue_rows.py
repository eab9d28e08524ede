"""Read the vendored Splatalogue rows (``sources/splatalogue_rows.txt``) for the catalog generators.

The rows are copies of published catalogue entries (see
``sources/vendor_splatalogue.py``): CDMS (Mueller et al. 2005), JPL (Pickett
et al. 1998) and Splatalogue's line list 14 ("SLISE"), as merged by
Splatalogue (Remijan et al. 2007). Used by ``make_transitions.py`` (lines) and
``make_partition_functions.py`` (level lists of the spin species).
"""

import re
from pathlib import Path

ROWS = Path(__file__).parent / "sources" / "splatalogue_rows.txt"
LINE_LISTS = {10: "CDMS catalogue (Mueller et al. 2005)", 12: "JPL catalogue (Pickett et al. 1998)",
              14: "Splatalogue line list 14 ('SLISE')"}
SPECIES_IDS = {"H2CO": 194, "CH3OH": 55, "HNCO": 673, "HDO": 472, "CH3CN": 606, "CH3CCH": 311,
               "H2O": 418, "SiO v=1": 1089, "SiO v=2": 1090, "HC3N": 294, "N2D+": 59, "HN13C": 473,
               "C34S": 117, "13CS": 142, "DCN": 23, "DCO+": 256, "C17O": 226, "H13CN": 137, "HC15N": 255,
               "H13CO+": 38, "HCO+": 15, "HF": 535, "c-C3H2": 493}
_ASYM = re.compile(r"^\s*(\d+)\(\s*(-?\d+),\s*(\d+)\)-\s*(\d+)\(\s*(-?\d+),\s*(\d+)\)\s*([+-]{2})?\s*$")
_SYMTOP = re.compile(r"^\s*(\d+)\(\s*(\d+)\)-\s*(\d+)\(\s*(\d+)\)(?:,\s*F=\s*(\d+)-\s*(\d+))?\s*$")
_LINEAR = re.compile(r"^\s*(?:J=)?\s*(\d+)\s*-\s*(\d+)\s*$")


def copy_read():
    """The first header line: which published copy the rows were read from."""
    return ROWS.read_text(encoding="utf-8").splitlines()[0].removeprefix("# copy read: ")


def rows(species):
    """[(nu [GHz], QN text, A [s^-1], E_low [K], E_up [K], g_up, line list id)] of one species (nan: none given)."""
    wanted = str(SPECIES_IDS[species])
    out = []
    for line in ROWS.read_text(encoding="utf-8").splitlines():
        if line.startswith("#"):
            continue
        cells = line.split("\t")
        if cells[0] != wanted:
            continue
        a = 10 ** float(cells[5]) if cells[5] != "None" else float("nan")
        g = float(cells[8]) if cells[8] != "None" else float("nan")
        out.append((float(cells[3]) * 1e-3, cells[4], a, float(cells[6]), float(cells[7]), g, int(cells[1])))
    return out


def asymmetric_top_levels(qn):
    """((J, Ka, Kc), (J, Ka, Kc), parity text) of 'J( Ka, Kc)- J( Ka, Kc) [++]', or None (hyperfine rows)."""
    match = _ASYM.match(qn)
    if not match:
        return None
    q = [int(v) for v in match.groups()[:6]]
    return tuple(q[:3]), tuple(q[3:]), match.group(7) or ""


def symmetric_top_levels(qn):
    """(J_up, K, J_low, F_up, F_low) of 'J( K)- J( K)[, F= F- F]' (F None when unsplit), or None."""
    match = _SYMTOP.match(qn)
    if not match:
        return None
    j_up, k, j_low, k_low, f_up, f_low = match.groups()
    if k != k_low:
        return None
    return int(j_up), int(k), int(j_low), None if f_up is None else int(f_up), None if f_low is None else int(f_low)


def linear_rotor_levels(qn):
    """(J_up, J_low) of an unsplit linear-rotor line 'J= 3- 2' or '3-2', or None."""
    match = _LINEAR.match(qn)
    if not match:
        return None
    return int(match.group(1)), int(match.group(2))
