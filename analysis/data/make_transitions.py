"""Write ``transitions.ecsv``, the line catalog bundled with cubeloupe.

The rows below are the curated source of the catalog; run this script after
editing them (``python analysis/data/make_transitions.py``) and commit both
files. Users extend the catalog with their own ECSV/CSV line list instead
(see `cubeloupe.analysis.load_catalog`), never by editing the bundled file.

Where values come from is named again, row by row, in the ``provenance``
column, as clauses ``nu: ...``, ``E_up: ...`` and ``A: ...`` joined by "; ".
Values copied from a published file name the file, the publication and the
public repository holding the copy that was read; the copies are listed in
``SOURCES`` below. Values that could not be checked against a published file
keep the mark "from memory". Derived values say how they were derived:

* E_up/k of a rotational ladder without a published table is the sum of
  h nu / k up the ladder (computed here); a lone line from the ground level
  has E_up/k = h nu / k;
* Einstein A of a linear rotor without a published table comes from the
  rigid-rotor formula A = 64 pi^4 nu^3 mu^2 J_u / (3 h c^3 (2 J_u + 1)) with
  the dipole moment named in the row; NaN where no value is known.

Water: the catalog counts the ortho levels from the para ground level 0_00
(1_01 lies 23.794 cm^-1 = 34.23 K above it), as the trade does. The o-H2O file
used here lists its level energies on that same scale (1_01 at 23.794356
cm^-1), so its E_up values are taken unchanged; a file counting from 1_01
would need 34.23 K added.

tests/analysis/test_catalog_reference.py compares the rows with the published
numbers, vendored in tests/data/catalog_reference.ecsv.

Since issue 15 the catalog also holds, in this order of precedence: the curated
rows below; every line up to E_up/k = 600 K between 20 GHz and 1.91 THz of the
LAMDA files vendored in ``sources/lamda/`` (level and line sections, each file
naming the public copy read; see ``sources/vendor_lamda.py``), hyperfine-resolved
where the file is; linear rotors computed from constants fitted to recalled or
published lines (ROTORS); the CH3CN and CH3CCH K ladders from recalled
symmetric-top constants, replaced since by the published lines; hyperfine
groups from published component tables (N2H+ J=1-0, NH3 (1,1) and (2,2), C17O
J=1-0); the lines of H2CO, CH3OH, HNCO, HDO, CH3CN and CH3CCH and the SiO v=1,
v=2 and HC3N ladders copied from the published catalogues as vendored from
Splatalogue (``sources/splatalogue_rows.txt``, see ``_published_rows``); and
the H, He and C recombination lines of
`cubeloupe.analysis.recombination`. Each row's g_up follows DEGENERACY below;
``make_partition_functions.py`` writes the matching partition functions.
"""

from pathlib import Path

import astropy.units as u
import numpy as np

from cubeloupe.analysis.data import splatalogue_rows as splat
from cubeloupe.analysis.recombination import recombination_lines

HERE = Path(__file__).parent
TARGET = HERE / "transitions.ecsv"

# h / k in K per GHz (CODATA 2018: h = 6.62607015e-34 J s, k = 1.380649e-23 J/K).
H_OVER_K = 6.62607015e-34 * 1e9 / 1.380649e-23

NAN = float("nan")

# ---------------------------------------------------------------------------
# Published files read for this catalog (the copy read: GitHub repository and
# path). LAMDA: Leiden Atomic and Molecular Database, Schoier et al. 2005,
# A&A 432, 369.
# ---------------------------------------------------------------------------
LAMDA = "LAMDA (Schoier et al. 2005, A&A 432, 369)"
_REDIST = "as redistributed with 3D-PDR, copy in GitHub itamos-ism/3D-PDR chemfiles/"
_PYNEB = "copy in GitHub Morisset/PyNeb_devel pyneb/atomic_data/"
SOURCES = {
    "co": f"{LAMDA} co.dat, copy in GitHub aqingo3o/line-modeling_Circinus data/co.dat",
    "13co": f"{LAMDA} 13CO file {_REDIST}13co.dat",
    "c18o": f"{LAMDA} c18o.dat, copy in GitHub fjdu/myRadex c18o.dat",
    "hcn": f"{LAMDA} hcn.dat, copy in GitHub fjdu/myRadex hcn.dat",
    "hco+": f"{LAMDA} hco+@xpol.dat, copy in GitHub fjdu/myRadex hco+@xpol.dat",
    "hnc": f"{LAMDA} hnc.dat {_REDIST}hnc.dat",
    "sio": f"{LAMDA} SiO file (SiO-H2 rates Balanca et al. 2018) {_REDIST}sio-h2.dat",
    "cn": f"{LAMDA} CN hyperfine file {_REDIST}cn-hfs.dat (vendored in sources/lamda/cn-hfs.dat)",
    "ch+": f"{LAMDA} CH+ file {_REDIST}ch+.dat",
    "catom": f"{LAMDA} catom.dat {_REDIST}12c.dat",
    "c+": f"{LAMDA} c+.dat {_REDIST}12c+.dat",
    "oatom": f"{LAMDA} oatom.dat {_REDIST}16o.dat",
    "o-h2o": f"{LAMDA} o-H2O file (spectroscopy from JPL, rates Dubernet et al. 2009), copy in GitHub "
             "UCL/Magritte Projects/Lime_1/data/H2O.dat",
    "h2o-lab": "laboratory line positions of the Rosenkranz water-vapour absorption model "
               "(h2o_sdlist 2020, measurements cited there), copy in GitHub SatCloP/pyrtlib "
               "matlab-source/RTEMat/h2o_sdlist_r20a.m",
    "n+ A": f"Froese Fischer & Tachiev 2004 (ADNDT 87, 1), {_PYNEB}n_ii_atom_FFT04.dat",
    "n+ levels": f"NIST level energies, {_PYNEB}levels/n_ii_levels.dat",
    "o++ A": f"Froese Fischer & Tachiev 2004 (ADNDT 87, 1), {_PYNEB}o_iii_atom_FFT04-SZ00.dat",
    "o++ levels": f"NIST level energy 113.178 cm^-1, {_PYNEB}levels/o_iii_levels.dat",
    "c+ A": f"Galavis, Mendoza & Zeippen 1998 (A&AS 131, 499), {_PYNEB}c_ii_atom_GMZ98.dat",
}
CDMS = "CDMS catalogue (Mueller et al. 2005)"
JPL = "JPL catalogue (Pickett et al. 1998)"

# ---------------------------------------------------------------------------
# Linear rotors with a published table: (species, provenance, rows of
# (nu [GHz], E_up [K], A [s^-1]) for J=1-0, 2-1, ...), copied from the file.
# ---------------------------------------------------------------------------
PUBLISHED_LADDERS = [
    ("CO", f"nu, E_up, A: {SOURCES['co']}", [
        (115.2712018, 5.53, 7.203e-08), (230.5380000, 16.60, 6.910e-07),
        (345.7959899, 33.19, 2.497e-06), (461.0407682, 55.32, 6.126e-06),
        (576.2679305, 82.97, 1.221e-05), (691.4730763, 116.16, 2.137e-05),
        (806.6518060, 154.87, 3.422e-05), (921.7997000, 199.11, 5.134e-05),
        (1036.9123930, 248.88, 7.330e-05), (1151.9854520, 304.16, 1.006e-04),
        (1267.0144860, 364.97, 1.339e-04), (1381.9951050, 431.29, 1.735e-04),
        (1496.9229090, 503.13, 2.200e-04)]),
    ("13CO", f"nu, E_up, A: {SOURCES['13co']}", [
        (110.2013542798, 5.29, 6.294e-08), (220.3986841281, 15.87, 6.038e-07),
        (330.5879652218, 31.73, 2.181e-06), (440.7651734547, 52.89, 5.353e-06),
        (550.9262850456, 79.33, 1.067e-05), (661.0672766472, 111.05, 1.868e-05)]),
    ("C18O", f"nu, E_up, A: {SOURCES['c18o']}", [
        (109.7821734, 5.27, 6.266e-08), (219.5603541, 15.81, 6.011e-07),
        (329.3305525, 31.61, 2.172e-06), (439.0887658, 52.68, 5.330e-06),
        (548.8310055, 79.02, 1.062e-05), (658.5532782, 110.63, 1.860e-05)]),
    ("HCN", f"nu (hyperfine-free centre), E_up, A: {SOURCES['hcn']}", [
        (88.6316023, 4.25, 2.4075e-05), (177.2611115, 12.76, 2.3108e-04),
        (265.8864343, 25.52, 8.3559e-04), (354.5054779, 42.53, 2.0540e-03),
        (443.1161493, 63.80, 4.1022e-03), (531.7163479, 89.32, 7.1971e-03)]),
    # The frequencies stay the CDMS values (unchecked): the LAMDA HCO+ files list
    # values 0.002-0.2 MHz (hco+@xpol.dat) and 0.13-0.44 MHz (hco+.dat) away from them,
    # and 0.13-0.61 MHz away from each other, so they cannot settle the last digits.
    ("HCO+", f"nu: {CDMS}, from memory, within 0.2 MHz of the LAMDA file; E_up, A: {SOURCES['hco+']}", [
        (89.1885247, 4.28, 4.2512e-05), (178.3750563, 12.84, 4.0810e-04),
        (267.5576259, 25.68, 1.4757e-03), (356.7342230, 42.80, 3.6269e-03),
        (445.9028721, 64.20, 7.2449e-03), (535.0615810, 89.88, 1.2711e-02)]),
    ("HNC", f"nu, E_up, A: {SOURCES['hnc']}", [
        (90.663568, 4.35, 2.690e-05), (181.324758, 13.05, 2.582e-04),
        (271.981142, 26.11, 9.336e-04), (362.630303, 43.51, 2.295e-03),
        (453.269922, 65.26, 4.584e-03), (543.897554, 91.37, 8.041e-03)]),
    ("SiO", f"nu (v=0), E_up, A: {SOURCES['sio']}", [
        (43.423853, 2.08, 3.049e-06), (86.846985, 6.25, 2.927e-05),
        (130.268683, 12.50, 1.058e-04), (173.688238, 20.84, 2.602e-04),
        (217.104919, 31.26, 5.197e-04), (260.518009, 43.76, 9.118e-04),
        (303.926812, 58.35, 1.464e-03), (347.330581, 75.02, 2.204e-03)]),
]

# ---------------------------------------------------------------------------
# Water, H2(16)O, vibrational ground state. Upper/lower levels as J_KaKc.
# Row: (upper, lower, nu [GHz], where nu is from, E_up [K], A [s^-1], where
# E_up and A are from). nu from "lab" (the laboratory list in SOURCES) or
# "memory"; E_up and A from "o-h2o" (the LAMDA file) or "memory".
# Where both exist, the LAMDA o-H2O frequencies lie 0.05-0.4 MHz above the
# laboratory positions, so the laboratory list wins; lines missing from it
# keep their JPL frequency (unchecked) when LAMDA's value is within 0.5 MHz.
# ---------------------------------------------------------------------------
WATER = [
    ("1_10", "1_01", 556.935985, "lab", 61.0, 3.458e-03, "o-h2o"),
    ("2_12", "1_01", 1669.904775, "memory", 114.4, 5.593e-02, "o-h2o"),
    ("2_21", "2_12", 1661.007637, "memory", 194.1, 3.058e-02, "o-h2o"),
    ("3_03", "2_12", 1716.769633, "memory", 196.8, 5.048e-02, "o-h2o"),
    ("3_12", "3_03", 1097.364790, "memory", 249.4, 1.648e-02, "o-h2o"),
    ("3_12", "2_21", 1153.126820, "memory", 249.4, 2.634e-03, "o-h2o"),
    ("3_21", "3_12", 1162.911602, "memory", 305.3, 2.288e-02, "o-h2o"),
    ("3_30", "3_21", 2196.345756, "memory", 410.7, 6.619e-02, "o-h2o"),
    ("4_14", "3_21", 380.197353, "lab", 323.5, 2.992e-05, "o-h2o"),
    ("4_23", "3_30", 448.001085, "lab", 432.2, 5.263e-05, "o-h2o"),
    ("4_23", "4_14", 2264.149650, "memory", 432.2, 8.084e-02, "o-h2o"),
    ("5_14", "5_05", 2221.750500, "memory", 574.7, 7.579e-02, "o-h2o"),
    ("5_23", "5_14", 1410.618069, "memory", 642.4, 4.314e-02, "o-h2o"),
    ("5_32", "5_23", 1867.748594, "memory", 732.1, 8.174e-02, "o-h2o"),
    ("5_32", "4_41", 620.700807, "lab", 732.1, 1.039e-04, "o-h2o"),
    ("6_16", "5_23", 22.235080, "lab", 643.5, 1.859e-09, "o-h2o"),
    ("6_43", "5_50", 439.150807, "lab", 1088.8, 2.575e-05, "o-h2o"),
    ("10_29", "9_36", 321.225630, "lab", 1861.3, 5.048e-06, "o-h2o"),
    ("1_11", "0_00", 1113.343007, "memory", 53.4, 1.842e-02, "memory"),
    ("2_02", "1_11", 987.926759, "memory", 100.8, 5.835e-03, "memory"),
    ("2_11", "2_02", 752.033113, "lab", 136.9, 7.062e-03, "memory"),
    ("2_20", "2_11", 1228.788719, "memory", 195.9, NAN, "memory"),
    ("3_13", "2_20", 183.310087, "lab", 204.7, 3.65e-06, "memory"),
    ("3_13", "2_02", 2164.131980, "memory", 204.7, NAN, "memory"),
    ("3_22", "3_13", 1919.359531, "memory", 296.8, NAN, "memory"),
    ("4_04", "3_13", 2391.572628, "memory", 319.5, NAN, "memory"),
    ("4_13", "4_04", 1602.219369, "memory", 396.4, NAN, "memory"),
    ("4_13", "3_22", 2074.432305, "memory", 396.4, NAN, "memory"),
    ("3_31", "3_22", 2365.899659, "memory", 410.4, NAN, "memory"),
    ("3_31", "4_04", 1893.686510, "memory", 410.4, NAN, "memory"),
    ("4_22", "4_13", 1207.638730, "memory", 454.3, NAN, "memory"),
    ("4_22", "3_31", 916.171582, "lab", 454.3, NAN, "memory"),
    ("4_31", "4_22", 2040.476810, "memory", 552.3, NAN, "memory"),
    ("5_24", "4_31", 970.315022, "memory", 598.8, NAN, "memory"),
    ("5_15", "4_22", 325.152888, "lab", 469.9, NAN, "memory"),
    ("5_33", "4_40", 474.689092, "lab", 725.1, NAN, "memory"),
    ("7_53", "6_60", 437.346667, "memory", 1524.8, NAN, "memory"),
]

# ---------------------------------------------------------------------------
# Everything else: (species, transition, nu [GHz], E_up [K], A [s^-1],
#                   spin isomer, provenance)
# ---------------------------------------------------------------------------
_FROM_GROUND = "E_up: h nu/k from the ground level"
OTHERS = [
    ("[CI]", "3P1-3P0", 492.16065, 23.620, 7.880e-08, "none", f"nu, E_up, A: {SOURCES['catom']}"),
    ("[CI]", "3P2-3P1", 809.34197, 62.462, 2.650e-07, "none", f"nu, E_up, A: {SOURCES['catom']}"),
    # A: the LAMDA copy read gives 2.321e-6 (1.3 % higher); the catalog keeps the computed value of
    # Galavis et al., which agrees with the recalled one.
    ("[CII]", "2P3/2-2P1/2", 1900.5369, 91.211, 2.291e-06, "none",
     f"nu, E_up: {SOURCES['c+']}; A: {SOURCES['c+ A']}"),
    ("[NII]", "3P1-3P0", 1461.1314, 70.12, 2.083e-06, "none",
     (f"nu: Brown et al. 1994, from memory; {_FROM_GROUND}, within 0.1 K of the {SOURCES['n+ levels']}; "
      f"A: {SOURCES['n+ A']}")),
    ("[NII]", "3P2-3P1", 2459.3801, 188.15, 7.420e-06, "none",
     ("nu: Brown et al. 1994, from memory; E_up: E_up of 3P1 plus h nu/k, within 0.1 K of the "
      f"{SOURCES['n+ levels']}; A: {SOURCES['n+ A']}")),
    ("[OI]", "3P1-3P2", 4744.77749, 227.713, 8.910e-05, "none", f"nu, E_up, A: {SOURCES['oatom']}"),
    ("[OI]", "3P0-3P1", 2060.06909, 326.581, 1.750e-05, "none", f"nu, E_up, A: {SOURCES['oatom']}"),
    ("[OIII]", "3P1-3P0", 3393.00624, 162.84, 2.596e-05, "none",
     ("nu: Moreno et al. 1986 (via NIST), from memory, within 10 MHz of the NIST level energy; "
      f"E_up: {SOURCES['o++ levels']}; A: {SOURCES['o++ A']}")),
    # CN: the hyperfine groups of N=1-0 and 2-1 come from the vendored LAMDA file (LAMDA_HYPERFINE).
    ("OH+", "N=1-0 J=0-1", 909.1588, 43.63, NAN, "none",
     f"nu: {CDMS}, strongest hyperfine component, from memory; {_FROM_GROUND}"),
    ("OH+", "N=1-0 J=2-1", 971.8053, 46.64, NAN, "none",
     f"nu: {CDMS}, strongest hyperfine component, from memory; {_FROM_GROUND}"),
    ("OH+", "N=1-0 J=1-1", 1033.1186, 49.58, NAN, "none",
     f"nu: {CDMS}, strongest hyperfine component, from memory; {_FROM_GROUND}"),
    ("H2O+", "1_11-0_00 J=3/2-1/2", 1115.2041, 53.52, NAN, "ortho",
     f"nu: {CDMS}, strongest hyperfine component, from memory; {_FROM_GROUND}"),
    ("H2O+", "1_11-0_00 J=1/2-1/2", 1139.5612, 54.69, NAN, "ortho",
     f"nu: {CDMS}, strongest hyperfine component, from memory; {_FROM_GROUND}"),
    ("CH+", "J=1-0", 835.1375040, 40.080, 6.363e-03, "none", f"nu, E_up, A: {SOURCES['ch+']}"),
    ("HF", "J=1-0", 1232.476200, 59.15, 2.42e-2, "none",
     f"nu: Nolt et al. 1987, from memory; {_FROM_GROUND}; A: from memory"),
    # NH3 (1,1) and (2,2) are hyperfine groups (NH3_OFFSETS), their lines from the LAMDA p-NH3 file.
]


# ---------------------------------------------------------------------------
# Bulk lines read from vendored LAMDA files (sources/lamda/, each naming the
# copy read in its first line). Per file: species, family, how to name a
# transition from the level labels, the nuclear-spin multiplicity of the
# hyperfine-splitting nuclei (divided out of the level weights, see
# DEGENERACY), whether the file belongs to one spin isomer, and the
# transitions already curated above (kept from there).
# ---------------------------------------------------------------------------
LAMDA_DIR = HERE / "sources" / "lamda"
MAX_E_UP = 600.0     # K; bulk rows up to this E_up (curated rows may lie higher)
BAND = (20.0, 1910.0)  # GHz: the bands the catalog covers

DEGENERACY = """\
g_up convention: the degeneracy of the upper level without nuclear-spin
factors. A rotational level has 2J+1 (x2 for the +/-K pair of a symmetric top's
K>0 level); a fine-structure level 2J+1. Ortho and para (and A and E) species
are separate species with their own partition function, so their spin weights
are left out of both g_up and Q. Nuclear spins that split lines into hyperfine
components are left out too: a hyperfine component's g_up is (2F+1)/prod(2I+1),
its share of the rotational level, so the components of a level sum to 2J+1.
Exception: CH3CN and CH3CCH keep the relative spin weight of their K ladders
(2 for K = 3n, 1 otherwise; Araya et al. 2005, ApJS 157, 279, scaled by 4),
because one partition function covers all K (the CDMS CH3CCH and JPL CH3CN
entries print the same weights). CH3OH's A and E rows carry 2J+1, as the
JPL total Q counts both; each also has its own Q (spin_isomer "A", "E").
Partition functions follow the same convention (analysis/partition.py)."""


def _ghz_cm(nu_ghz):
    return nu_ghz / 29.9792458


K_PER_CM = 1.4387769  # hc/k in K cm (CODATA 2018)


def read_lamda(name):
    """(copy, levels {index: (E [cm^-1], g, label)}, lines [(up, low, A, nu, E_up)]) of a vendored file."""
    text = (LAMDA_DIR / name).read_text(encoding="utf-8").splitlines()
    copy = text[0].removeprefix("# copy read: ").split(" (levels")[0]
    body = [line for line in text[1:]]
    levels, lines = {}, []
    k = 0
    while k < len(body):
        upper = body[k].upper()
        if "NUMBER OF ENERGY LEVELS" in upper:
            count = int(body[k + 1].split()[0])
            for row in body[k + 3:k + 3 + count]:
                parts = row.split()
                levels[int(parts[0])] = (float(parts[1]), float(parts[2]), " ".join(parts[3:]).strip('" '))
            k += 3 + count
            continue
        if "NUMBER" in upper and "RADIATIVE" in upper:
            count = int(body[k + 1].split()[0])
            for row in body[k + 3:k + 3 + count]:
                parts = row.split()
                lines.append((int(parts[1]), int(parts[2]), float(parts[3]), float(parts[4]), float(parts[5])))
            k += 3 + count
            continue
        k += 1
    return copy, levels, lines


def _rotor_name(up, low):
    return f"J={up.split('_')[0].lstrip('0') or '0'}-{low.split('_')[0].lstrip('0') or '0'}"


def _asym(label):
    j, ka, kc = (int(q) for q in label.replace("_", " ").split()[:3])
    return f"{j}_{ka}{kc}" if ka < 10 and kc < 10 else f"{j}_{ka},{kc}"


def _asym_name(up, low):
    return f"{_asym(up)}-{_asym(low)}"


def _so_name(up, low):
    return f"N_J={up}-{low}"


def _nh3_name(up, low):
    (ju, ku, iu), (jl, kl, il) = ([int(q) for q in s.split("_")] for s in (up, low))
    if (ju, ku) == (jl, kl):
        return f"(J,K)=({ju},{ku})"
    return f"(J,K,inv)=({ju},{ku},{iu})-({jl},{kl},{il})"


def _h3o_name(up, low):
    (ju, ku, su), (jl, kl, sl) = (s.split("_") for s in (up, low))
    return f"J_K={ju}_{ku}{su}-{jl}_{kl}{sl}"


def _j_of(label):
    """J of a level label whose first field is J (or N for the rotor files)."""
    return float(label.replace("_", " ").split()[0])


LAMDA_SPECIES = [
    # file, species, family, namer, hyperfine spin multiplicity, spin isomer
    ("co.dat", "CO", "CO and isotopologues", _rotor_name, 1, "none"),
    ("cs@lique.dat", "CS", "dense gas", _rotor_name, 1, "none"),
    ("sio.dat", "SiO", "shock tracers", _rotor_name, 1, "none"),
    ("hco+.dat", "HCO+", "dense gas", _rotor_name, 1, "none"),
    ("hnc.dat", "HNC", "dense gas", _rotor_name, 1, "none"),
    ("hcn.dat", "HCN", "dense gas", _rotor_name, 3, "none"),  # its weights count 14N's spin
    ("n2h+.dat", "N2H+", "dense gas", _rotor_name, 1, "none"),
    ("hc3n.dat", "HC3N", "dense gas", _rotor_name, 1, "none"),
    ("ocs@xpol.dat", "OCS", "shock tracers", _rotor_name, 1, "none"),
    ("SO-pH2.dat", "SO", "shock tracers", _so_name, 1, "none"),
    ("so2@lowT.dat", "SO2", "shock tracers", _asym_name, 1, "none"),
    ("o-nh3.dat", "NH3", "dense gas", _nh3_name, 1, "ortho"),
    ("p-nh3.dat", "NH3", "dense gas", _nh3_name, 1, "para"),
    ("oh2s.dat", "H2S", "shock tracers", _asym_name, 1, "ortho"),
    ("ph2s.dat", "H2S", "shock tracers", _asym_name, 1, "para"),
    ("o-c3h2.dat", "c-C3H2", "dense gas", _asym_name, 1, "ortho"),
    ("p-c3h2.dat", "c-C3H2", "dense gas", _asym_name, 1, "para"),
    ("o-h3o+.dat", "H3O+", "water and hydrides", _h3o_name, 1, "ortho"),
    ("p-h3o+.dat", "H3O+", "water and hydrides", _h3o_name, 1, "para"),
]

# Hyperfine-resolved LAMDA files: (file, species, family, spin multiplicity of the
# splitting nuclei, group namer, component namer, upper J values kept).
def _hcn_group(up, low):
    return f"J={int(up.split('_')[0])}-{int(low.split('_')[0])}"


def _hcn_component(up, low):
    return f"{_hcn_group(up, low)} F={int(up.split('_')[1])}-{int(low.split('_')[1])}"


def _frac(text):
    value = float(text)
    return str(int(value)) if value == int(value) else f"{int(2 * value)}/2"


def _cch_group(up, low):
    return f"N={up.split('_')[0]}-{low.split('_')[0]}"


def _cch_component(up, low):
    (nu_, ju, fu), (nl, jl, fl) = (s.split("_") for s in (up, low))
    return f"N={nu_}-{nl} J={_frac(ju)}-{_frac(jl)} F={fu}-{fl}"


def _ohp_group(up, low):
    (nu_, ju, _), (nl, jl, _) = (s.split("_") for s in (up, low))
    return f"N={nu_}-{nl} J={ju}-{jl}"


def _ohp_component(up, low):
    (nu_, ju, fu), (nl, jl, fl) = (s.split("_") for s in (up, low))
    return f"N={nu_}-{nl} J={ju}-{jl} F={_frac(fu)}-{_frac(fl)}"


def _cn_group(up, low):
    (nu_, ju, _), (nl, jl, _) = (s.split() for s in (up, low))
    return f"N={int(float(nu_))}-{int(float(nl))} J={_frac(ju)}-{_frac(jl)}"


def _cn_component(up, low):
    return f"{_cn_group(up, low)} F={_frac(up.split()[2])}-{_frac(low.split()[2])}"


def _hcl_group(up, low):
    return f"J={up.split()[0]}-{low.split()[0]}"


def _hcl_component(up, low):
    return f"{_hcl_group(up, low)} F={up.split()[1]}-{low.split()[1]}"


LAMDA_HYPERFINE = [
    ("hcn@hfs.dat", "HCN", "dense gas", 3, _hcn_group, _hcn_component, {1}),
    ("c2h.dat", "CCH", "dense gas", 2, _cch_group, _cch_component, None),
    ("oh+.dat", "OH+", "water and hydrides", 2, _ohp_group, _ohp_component, None),
    ("hcl@hfs.dat", "HCl", "water and hydrides", 4, _hcl_group, _hcl_component, None),
    # CN N=1-0 and 2-1 (14N, I = 1): spectroscopy of the CDMS entry (Mueller et al. 2005) as the LAMDA file
    # gives it; the LTE shares g A agree with the relative intensities of Skatrud et al. 1983 (tests).
    ("cn-hfs.dat", "CN", "dense gas", 3, _cn_group, _cn_component, None),
]

# ---------------------------------------------------------------------------
# Linear rotors computed from rotational constants (nu = 2B(J+1) - 4D(J+1)^3,
# E_J = hB J(J+1) - hD J^2(J+1)^2; rigid-rotor A). B and D are least-squares
# fits to the recalled line frequencies in ROTOR_ANCHORS (CDMS values as
# recalled; their mutual consistency, the fit residual, is checked in the tests).
# (species, label prefix, family, dipole [D], E_vib [K], J range)
# ---------------------------------------------------------------------------
ROTORS = [
    ("C17O", "", "CO and isotopologues", 0.11011, 0.0, None),
    ("H13CN", "", "dense gas", 2.985, 0.0, None),
    ("HC15N", "", "dense gas", 2.985, 0.0, None),
    ("DCN", "", "dense gas", 2.985, 0.0, None),
    ("HN13C", "", "dense gas", 3.05, 0.0, None),
    ("H13CO+", "", "dense gas", 3.90, 0.0, None),
    ("DCO+", "", "dense gas", 3.888, 0.0, None),
    ("N2D+", "", "dense gas", 3.40, 0.0, None),
    ("C34S", "", "dense gas", 1.957, 0.0, None),
    ("13CS", "", "dense gas", 1.957, 0.0, None),
    ("SiO", "v=1 ", "shock tracers", 3.12, 1769.0, (1, 12)),
    ("SiO", "v=2 ", "shock tracers", 3.12, 3521.0, (1, 12)),
]
# Recalled rest frequencies [MHz] by upper J (hyperfine-free centres where split).
ROTOR_ANCHORS = {
    "C17O": [(2, 224714.1870), (3, 337061.1298)],
    "H13CN": [(1, 86339.9214), (2, 172677.8513), (3, 259011.7979), (4, 345339.7694)],
    "HC15N": [(1, 86054.9664), (3, 258156.9963), (4, 344200.1089)],
    "DCN": [(1, 72414.6936), (2, 144828.0015), (3, 217238.5378)],
    "HN13C": [(1, 87090.8252), (3, 261263.3100), (4, 348340.81)],
    "H13CO+": [(1, 86754.2884), (3, 260255.3390), (4, 346998.3440)],
    "DCO+": [(1, 72039.3122), (2, 144077.2890), (3, 216112.5822)],
    "N2D+": [(1, 77109.6162), (2, 154217.1805), (3, 231321.8283)],
    "C34S": [(2, 96412.9495), (3, 144617.1007), (5, 241016.0892), (7, 337396.4589)],
    "13CS": [(2, 92494.3080), (3, 138739.3350), (5, 231220.6852)],
    "SiO v=1": [(1, 43122.0800), (2, 86243.4277), (5, 215596.0180)],
    "SiO v=2": [(1, 42820.5700), (2, 85640.4560), (5, 214088.5750)],
    # HC3N: the 20 lines of the vendored LAMDA hc3n.dat are added in rotor_constants().
}
CONSTANTS_PROV = ("nu: B, D fitted to CDMS line frequencies (Mueller et al. 2005), from memory; E_up: level "
                  "energies from the same constants; A: rigid rotor with the dipole moment of the CDMS entry, "
                  "from memory")


def rotor_constants():
    """{name: (B [MHz], D [kHz], max fit residual [MHz])}: least squares over the anchors."""
    anchors = dict(ROTOR_ANCHORS)
    _, _, lines = read_lamda("hc3n.dat")
    anchors["HC3N"] = [(up - 1, nu * 1e3) for up, _, _, nu, _ in lines]
    # Where the vendored catalogue rows hold the ladder, fit to those lines instead (CONSTANTS_FROM_ROWS).
    for name in CONSTANTS_FROM_ROWS:
        anchors[name] = sorted({int(key.split("J=")[1].split("-")[0]): value[0] * 1e3
                                for key, value in _published_ladders().items() if key.startswith(f"{name} J=")}.items())
    out = {}
    for name, pairs in anchors.items():
        j = np.array([p[0] for p in pairs], dtype=float)
        nu = np.array([p[1] for p in pairs])
        design = np.c_[2 * j, -4 * j**3]
        (b, d), *_ = np.linalg.lstsq(design, nu, rcond=None)
        out[name] = (float(b), float(d) * 1e3, float(np.max(np.abs(nu - design @ (b, d)))))
    return out


CONSTANTS_FROM_ROWS_PROV = ("nu: B, D fitted to the published lines of the vendored Splatalogue rows "
                            "(sources/splatalogue_rows.txt), extrapolated past the last; E_up: level energies "
                            "from the same constants; A: rigid rotor with the dipole moment of the CDMS entry, "
                            "from memory")
# Species whose B, D are fitted to the published lines of the vendored rows (not to recalled ones).
CONSTANTS_FROM_ROWS = ["H13CN", "HC15N", "DCN", "HN13C", "H13CO+", "DCO+", "N2D+", "C34S", "13CS"]

ROTORS.append(("HC3N", "", "dense gas", 3.73, 0.0, None))
HC3N_PROV = ("nu: B, D fitted to the lines of the LAMDA file hc3n.dat (vendored copy of the PyPI wheel "
             "spectralradex-1.1.5), extrapolated past J=20; E_up: level energies from the same constants; "
             "A: rigid rotor with mu=3.73 D (CDMS entry, from memory)")

# ---------------------------------------------------------------------------
# Hyperfine groups from published component tables:
# N2H+ J=1-0: offsets and line strengths of the 15 components tabulated in
# pyspeckit 1.0.4 (PyPI) pyspeckit/spectrum/models/n2hp.py (Dore, priv. comm.,
# improving Pagani, Daniel & Dubernet 2009, A&A 494, 719), merged into the 7
# resolved groups (components with the same offset); centre 93.1737637 GHz.
# NH3 (1,1) and (2,2): the 18 and 21 components of pyspeckit 1.0.4
# pyspeckit/spectrum/models/ammonia_constants.py (Kukolich 1967, Phys. Rev. 156,
# 83; Rydbeck et al. 1977) merged into the main line and the four satellite groups.
# Offsets are velocities: nu = nu0 (1 - v/c).
# ---------------------------------------------------------------------------
PYSPECKIT = "pyspeckit 1.0.4 (PyPI sdist)"
N2HP_CENTRE = 93.1737637
N2HP_COMPONENTS = [  # (label, [(offset km/s, strength)])
    ("F1,F=1,0-1,1", [(6.9238, 0.037038)]),
    ("F1,F=1,2-0,1", [(5.9704, 0.156482), (5.9704, 0.028705)]),
    ("F1,F=1,1-0,1", [(5.5371, 0.041361), (5.5371, 0.013309), (5.5371, 0.056442)]),
    ("F1,F=2,2-1,1", [(0.9533, 0.156480), (0.9533, 0.028705)]),
    ("F1,F=2,3-1,2", [(0.0, 0.259259)]),
    ("F1,F=2,1-1,1", [(-0.6112, 0.004376), (-0.6112, 0.034890), (-0.6112, 0.071844)]),
    ("F1,F=0,1-1,2", [(-7.9930, 0.025957), (-7.9930, 0.065372), (-7.9930, 0.019779)]),
]
NH3_OFFSETS = {
    (1, 1): [19.8513, 19.3159, 7.88669, 7.46967, 7.35132, 0.460409, 0.322042, -0.0751680, -0.213003,
             0.311034, 0.192266, -0.132382, -0.250923, -7.23349, -7.37280, -7.81526, -19.4117, -19.5500],
    (2, 2): [26.5263, 26.0111, 25.9505, 16.3917, 16.3793, 15.8642, 0.562503, 0.528408, 0.523745,
             0.0132820, -0.00379100, -0.0132820, -0.501831, -0.531340, -0.589080, -15.8547, -16.3698,
             -16.3822, -25.9505, -26.0111, -26.5263],
}
NH3_STRENGTHS = {
    (1, 1): [0.0740740, 0.148148, 0.0925930, 0.166667, 0.0185190, 0.0370370, 0.0185190, 0.0185190,
             0.0925930, 0.0333330, 0.300000, 0.466667, 0.0333330, 0.0925930, 0.0185190, 0.166667,
             0.0740740, 0.148148],
    (2, 2): [0.00418600, 0.0376740, 0.0209300, 0.0372090, 0.0260470, 0.00186000, 0.0209300, 0.0116280,
             0.0106310, 0.267442, 0.499668, 0.146512, 0.0116280, 0.0106310, 0.0209300, 0.00186000,
             0.0260470, 0.0372090, 0.0209300, 0.0376740, 0.00418600],
}
def nh3_inversion_lines():
    """{(J, K): (centre [GHz], E_up [K], A [s^-1], copy)} of the (1,1) and (2,2) inversion lines.

    From the LAMDA p-NH3 file: frequency and A of the line, E_up the upper level's energy (the file's
    levels count from the molecule's ground, like the catalog; its E_up column from para's lowest).
    """
    copy, levels, lines = read_lamda("p-nh3.dat")
    out = {}
    for up, low, a, nu, _ in lines:
        name = _nh3_name(levels[up][2], levels[low][2])
        for jk in ((1, 1), (2, 2)):
            if name == f"(J,K)=({jk[0]},{jk[1]})":
                out[jk] = (nu, round(levels[up][0] * K_PER_CM, 2), a, copy)
    return out
C_KMS = 299792.458

# C17O J=1-0 (17O, I = 5/2): F'=3/2, 7/2, 5/2 -> F=5/2; LTE-thin intensities 2F'+1 over 18.
C17O_10 = [("F=3/2-5/2", 112.358777, 4), ("F=7/2-5/2", 112.358982, 8), ("F=5/2-5/2", 112.360016, 6)]



# ---------------------------------------------------------------------------
# Row building
# ---------------------------------------------------------------------------

def _rigid_rotor_a(nu_ghz, j_up, dipole_debye):
    """Einstein A [s^-1] of a linear rotor's J -> J-1 line.

    A = 64 pi^4 nu^3 mu^2 J / (3 h c^3 (2J + 1)) in cgs units (e.g. Townes &
    Schawlow 1955); 1 D = 1e-18 esu cm.
    """
    return _symmetric_top_a(nu_ghz, j_up, 0, dipole_debye)


def _symmetric_top_a(nu_ghz, j_up, k, dipole_debye):
    """Einstein A [s^-1] of a symmetric top's (J, K) -> (J-1, K) line (Gordy & Cook 1984)."""
    h, c = 6.62607015e-27, 2.99792458e10
    mu = dipole_debye * 1e-18
    nu = nu_ghz * 1e9
    return 64 * np.pi**4 * nu**3 * mu**2 * (j_up**2 - k**2) / (3 * h * c**3 * j_up * (2 * j_up + 1))


FAMILIES = {
    "CO": "CO and isotopologues", "13CO": "CO and isotopologues", "C18O": "CO and isotopologues",
    "C17O": "CO and isotopologues", "HCN": "dense gas", "HCO+": "dense gas", "HNC": "dense gas",
    "CS": "dense gas", "CN": "dense gas", "NH3": "dense gas", "SiO": "shock tracers",
    "H2O": "water and hydrides", "H2O+": "water and hydrides", "OH+": "water and hydrides",
    "CH+": "water and hydrides", "HF": "water and hydrides", "[CI]": "atoms and ions",
    "[CII]": "atoms and ions", "[NII]": "atoms and ions", "[OI]": "atoms and ions",
    "[OIII]": "atoms and ions",
}


def _row(species, transition, nu, e_up, a, spin, prov, g_up, family=None, group="", share=1.0):
    return (species, transition, float(nu), float(e_up), float(a), spin, prov, float(g_up),
            family or FAMILIES[species], group, float(share))


def _atom_g(transition):
    """2J+1 of the upper term of '3P1-3P0' or '2P3/2-2P1/2'."""
    upper = transition.split("-")[0][2:]
    j = float(upper.split("/")[0]) / 2 if "/" in upper else float(upper)
    return 2 * j + 1


def _curated_rows():
    out = []
    ladders = _published_ladders()
    for species, prov, table in PUBLISHED_LADDERS:
        for j, (nu, e_up, a) in enumerate(table, start=1):
            if species == "HCN" and j == 1:
                continue  # HCN J=1-0 is a hyperfine group (LAMDA_HYPERFINE)
            row_prov = prov
            if species == "HCO+" and f"HCO+ J={j}-{j - 1}" in ladders:
                # the LAMDA file's E_up and A stay; nu from the published list (0.001-0.02 MHz from the
                # recalled CDMS values, within the LAMDA files' spread)
                nu, line_prov = ladders[f"HCO+ J={j}-{j - 1}"][0], ladders[f"HCO+ J={j}-{j - 1}"][3]
                row_prov = f"nu: {line_prov.split(': ', 1)[1].split('; ')[0]}; E_up, A: {SOURCES['hco+']}"
            out.append(_row(species, f"J={j}-{j - 1}", nu, e_up, a, "none", row_prov, 2 * j + 1))
    jpl_water = _published_water()
    for upper, lower, nu, nu_from, e_up, a, e_a_from in WATER:
        j = int(upper.split("_")[0])
        ka, kc = (int(q) for q in upper.split("_")[1])
        spin = "ortho" if (ka + kc) % 2 else "para"
        prov = _water_provenance(nu_from, e_a_from, spin, a)
        published = jpl_water.get(f"{upper}-{lower}")
        demo_chain = (f"H2O {upper}-{lower}" in DEMO_CHAIN and nu_from == "memory"
                      and round(published[0], 7) != nu) if published else False
        if published and (f"H2O {upper}-{lower}" in DEMO_LINES or demo_chain) and nu_from == "memory":
            prov = prov.replace("from memory", f"from memory, {(published[0] - nu) * 1e3:+.3f} MHz from the "
                                "JPL entry as copied in Splatalogue (kept: the demo cubes use this line)", 1)
        elif published and f"H2O {upper}-{lower}" not in DEMO_LINES and not demo_chain:
            nu, prov = _water_published(published, nu, nu_from, e_a_from, prov)
            if e_a_from == "memory":
                e_up = round(published[1], 2)
                a = float(f"{published[2]:.4g}") if np.isfinite(a) else a
        out.append(_row("H2O", f"{upper}-{lower}", nu, e_up, a, spin, prov, 2 * j + 1))
    for species, transition, nu, e_up, a, spin, prov in OTHERS:
        if species.startswith("["):
            g = _atom_g(transition)
        elif species == "OH+":
            continue  # replaced by the hyperfine-resolved LAMDA file
        elif species == "H2O+":
            g = 2 * 1.5 + 1 if "J=3/2" in transition else 2 * 0.5 + 1
        else:  # CH+, HF: J=1-0
            g = 3
            if species == "HF" and "HF J=1-0" in ladders:
                nu, e_up, a, prov = ladders["HF J=1-0"]
        out.append(_row(species, transition, nu, e_up, a, spin, prov, g))
    return out


def _lamda_rows(curated_names):
    out = []
    for name, species, family, namer, spins, spin in LAMDA_SPECIES:
        copy, levels, lines = read_lamda(name)
        lowest = min(levels, key=lambda i: levels[i][0])
        weight = levels[lowest][1] / (2 * _j_of(levels[lowest][2]) + 1) if spin != "none" else 1.0
        prov = f"nu, E_up, A, g_up: {LAMDA} file {name}, copy in {copy}" + (
            f" (g_up: the file's weight over {spins}, the 14N spin multiplicity)" if spins > 1 else "")
        for up, low, a, nu, e_up in lines:
            transition = namer(levels[up][2], levels[low][2])
            if not (BAND[0] <= nu <= BAND[1]) or e_up > MAX_E_UP or f"{species} {transition}" in curated_names:
                continue
            if species == "NH3" and transition in ("(J,K)=(1,1)", "(J,K)=(2,2)"):
                continue  # hyperfine groups below
            if (species, transition) in (("N2H+", "J=1-0"), ("HCN", "J=1-0")):
                continue  # hyperfine groups
            out.append(_row(species, transition, nu, e_up, a, spin, prov, levels[up][1] / weight / spins, family))
    return out


def _lamda_hyperfine_rows(curated_names):
    out = []
    for name, species, family, spins, group_of, component_of, keep_j in LAMDA_HYPERFINE:
        copy, levels, lines = read_lamda(name)
        prov = (f"nu, E_up, A: {LAMDA} file {name}, copy in {copy}; g_up: the file's 2F+1 over "
                f"{spins} (nuclear spin); relative_intensity: g_up A within the group")
        groups = {}
        for up, low, a, nu, e_up in lines:
            if keep_j is not None and int(_j_of(levels[up][2])) not in keep_j:
                continue
            if not (BAND[0] <= nu <= BAND[1]) or e_up > MAX_E_UP:
                continue
            group = f"{species} {group_of(levels[up][2], levels[low][2])}"
            groups.setdefault(group, []).append(
                (component_of(levels[up][2], levels[low][2]), nu, e_up, a, levels[up][1] / spins))
        for group, members in groups.items():
            total = sum(g * a for _, _, _, a, g in members)
            for transition, nu, e_up, a, g in members:
                if f"{species} {transition}" in curated_names:
                    continue
                out.append(_row(species, transition, nu, e_up, a, "none", prov, g, family,
                                group if len(members) > 1 else "", g * a / total if len(members) > 1 else 1.0))
    return out


def linear_rotor_levels(b_mhz, d_khz, j):
    """E_J/k [K] of a linear rotor: h (B J(J+1) - D J^2 (J+1)^2) / k."""
    j = np.asarray(j, dtype=float)
    return H_OVER_K * 1e-3 * (b_mhz * j * (j + 1) - d_khz * 1e-3 * j**2 * (j + 1) ** 2)


def _rotor_rows():
    out = []
    constants = rotor_constants()
    published = _published_ladders()
    for species, prefix, family, mu, e_vib, jrange in ROTORS:
        b, d, _ = constants[f"{species} {prefix}".strip()]
        j_lo, j_hi = jrange or (1, 200)
        for j in range(j_lo, j_hi + 1):
            nu = (2 * b * j - 4 * d * 1e-3 * j**3) * 1e-3
            e_up = e_vib + float(linear_rotor_levels(b, d, j))
            if nu > BAND[1] or e_up > (MAX_E_UP if not e_vib else e_vib + MAX_E_UP):
                break
            if nu < BAND[0] or (species == "C17O" and j == 1):
                continue
            if species == "HC3N" and j <= 20:
                continue  # from the LAMDA file
            a = float(f"{_rigid_rotor_a(nu, j, mu):.4g}")
            prov = HC3N_PROV if species == "HC3N" else (
                CONSTANTS_FROM_ROWS_PROV if species in CONSTANTS_FROM_ROWS else CONSTANTS_PROV)
            name = f"{species} {prefix}J={j}-{j - 1}"
            if name in published:
                nu, e_up, a, prov = published[name]
            out.append(_row(species, f"{prefix}J={j}-{j - 1}", round(nu, 7), round(e_up, 2), a, "none",
                            prov, 2 * j + 1, family))
    return out


def symmetric_top_weight(k):
    """g_K g_I of a C3v top's K ladder in this catalog's convention (see DEGENERACY)."""
    k = np.asarray(k)
    return np.where(k == 0, 1, 2) * np.where(k % 3 == 0, 2, 1)


def _published_group_rows():
    out = []
    prov = (f"nu: centre {N2HP_CENTRE} GHz and component offsets, relative_intensity: line strengths, "
            f"both from {PYSPECKIT} pyspeckit/spectrum/models/n2hp.py (Dore, priv. comm., after Pagani et al. "
            f"2009, A&A 494, 719); E_up, A: {LAMDA} file n2h+.dat, copy in GitHub itamos-ism/3D-PDR "
            "chemfiles/n2h+.dat@2e69703; g_up: 3 x relative_intensity (2J+1 shared by line strength)")
    strengths = [sum(s for _, s in parts) for _, parts in N2HP_COMPONENTS]
    total = sum(strengths)
    for (label, parts), strength in zip(N2HP_COMPONENTS, strengths):
        offset = sum(v * s for v, s in parts) / strength
        nu = N2HP_CENTRE * (1 - offset / C_KMS)
        share = strength / total
        out.append(_row("N2H+", f"J=1-0 {label}", round(nu, 7), 4.47, 3.628e-5, "none", prov, 3 * share,
                        "dense gas", "N2H+ J=1-0", share))
    labels = {0: "main", 1: "inner satellite (low nu)", 2: "outer satellite (low nu)",
              -1: "inner satellite (high nu)", -2: "outer satellite (high nu)"}
    for (j, k), offsets in NH3_OFFSETS.items():
        centre, e_up, a, copy = nh3_inversion_lines()[(j, k)]
        strengths = NH3_STRENGTHS[(j, k)]
        total = sum(strengths)
        inner = max(abs(v) for v in offsets if abs(v) < 12) if (j, k) == (1, 1) else 20.0
        g_level = 2 * j + 1
        buckets = {}
        for v, s in zip(offsets, strengths):
            side = 0 if abs(v) < 2 else (1 if abs(v) <= inner else 2) * (1 if v > 0 else -1)
            buckets.setdefault(side, []).append((v, s))
        prov = (f"nu: centre {centre} GHz of the LAMDA p-NH3 line plus component offsets, relative_intensity: "
                f"line strengths, both from {PYSPECKIT} pyspeckit/spectrum/models/ammonia_constants.py (Kukolich "
                "1967, Phys. Rev. 156, 83), merged per satellite group; E_up: the upper level's energy in the "
                f"level list of the same LAMDA file; A: {LAMDA} file p-nh3.dat, copy in {copy}; "
                "g_up: (2J+1) x relative_intensity")
        for side in (2, 1, 0, -1, -2):
            parts = buckets[side]
            strength = sum(s for _, s in parts)
            offset = sum(v * s for v, s in parts) / strength
            nu = centre * (1 - offset / C_KMS)
            share = strength / total
            out.append(_row("NH3", f"(J,K)=({j},{k}) {labels[side]}", round(nu, 7), e_up, a, "para", prov,
                            g_level * share, "dense gas", f"NH3 (J,K)=({j},{k})", share))
    total = sum(w for _, _, w in C17O_10)
    for label, nu, weight in C17O_10:
        out.append(_row("C17O", f"J=1-0 {label}", nu, 5.39, 6.7e-8, "none",
                        "nu: CDMS catalogue (Mueller et al. 2005), from memory; E_up: h nu/k from the ground "
                        "level; A: rigid rotor with mu=0.11 D, from memory; g_up, relative_intensity: "
                        "(2F'+1)/(2I+1) and (2F'+1)/18 for I(17O)=5/2",
                        weight / 6, "CO and isotopologues", "C17O J=1-0", weight / total))
    return out


# ---------------------------------------------------------------------------
# Lines copied from the published catalogues as vendored from Splatalogue
# (sources/splatalogue_rows.txt, see sources/vendor_splatalogue.py and
# splatalogue_rows.py): every line between 20 GHz and 1.91 THz up to MAX_E_UP of
# H2CO (CDMS), CH3OH (line list 14), HNCO (CDMS, hyperfine-free rows), HDO (JPL),
# CH3CCH (CDMS), CH3CN (JPL, whose hyperfine components are merged per (J, K)),
# the SiO v=1 and v=2 ladders and HC3N (CDMS). They replace the recalled rows of
# the recalled single lines and the ladders computed from recalled constants.
# (species, family, g_up divisor per row from the catalogue's convention)
# ---------------------------------------------------------------------------
PUBLISHED_SPECIES = ["H2CO", "CH3OH", "HNCO", "HDO", "CH3CCH", "CH3CN"]
# The lines of these asymmetric tops the catalog carries (the ones observers use most; every K
# ladder line of CH3CN and CH3CCH is kept). Not every published line: the delivery check's
# expected-line lists and identification rank all catalog lines alike, so thousands of weak or
# high-lying methanol lines would crowd out water and CO (tests/analysis/check); more lines wait
# for a strength filter there.
COMMON_LINES = {
    "H2CO": ["1_01-0_00", "2_12-1_11", "2_02-1_01", "2_11-1_10", "3_13-2_12", "3_03-2_02", "3_22-2_21",
             "3_21-2_20", "3_12-2_11", "4_14-3_13", "4_04-3_03", "4_23-3_22", "4_22-3_21", "4_13-3_12",
             "5_15-4_14", "5_05-4_04"],
    "CH3OH": ["7(0)-6(1) A+", "4(-1)-3(0) E", "5(-1)-4(0) E", "8(0)-7(1) A+", "2(1)-1(1) A+", "2(-1)-1(-1) E",
              "2(0)-1(0) A+", "2(0)-1(0) E", "2(1)-1(1) E", "3(1)-4(0) A+", "0(0)-1(-1) E", "4(2)-3(1) E",
              "8(-1)-7(0) E", "5(0)-4(0) E", "5(-1)-4(-1) E", "5(0)-4(0) A+", "7(-1)-6(-1) E", "7(0)-6(0) A+"],
    "HNCO": ["4_04-3_03", "5_05-4_04", "10_0,10-9_09", "16_0,16-15_0,15"],
    "HDO": ["1_10-1_11", "2_11-2_12", "3_12-2_21", "1_01-0_00", "1_11-0_00"],
}
FAMILY = {"H2CO": "complex organics", "CH3OH": "complex organics", "HNCO": "shock tracers",
          "HDO": "water and hydrides", "CH3CCH": "complex organics", "CH3CN": "complex organics"}
METHANOL_SYMMETRY = {"": "E", "++": "A+", "--": "A-", "+-": "A+-", "-+": "A-+"}


def _published_provenance(ll_id, extra=""):
    return (f"nu, E_up, A: {splat.LINE_LISTS[ll_id]}, entry as copied in Splatalogue (Remijan et al. 2007), "
            f"{splat.copy_read()}" + extra)


def _published_rows():
    out = []
    for species in PUBLISHED_SPECIES:
        if species == "CH3CN":
            out += _ch3cn_rows()
            continue
        for nu, qn, a, _, e_up, g_file, ll_id in splat.rows(species):
            if not (BAND[0] <= nu <= BAND[1]) or e_up > MAX_E_UP or not np.isfinite(a):
                continue
            spin, extra = "none", "; g_up: the file's"
            if species == "CH3CCH":
                j_up, k, j_low, _, _ = splat.symmetric_top_levels(qn)
                name, g = f"J={j_up}-{j_low} K={k}", (2 * j_up + 1) * float(symmetric_top_weight(k))
                extra += " (2J+1 times the K-ladder weight of DEGENERACY)"
            else:
                levels = splat.asymmetric_top_levels(qn)
                if levels is None:
                    continue  # a hyperfine component (HNCO); the hyperfine-free row is kept
                (ju, kau, kcu), (jl, kal, kcl), parity = levels
                g = 2 * ju + 1
                if species == "CH3OH":
                    name = f"{ju}({kau})-{jl}({kal}) {METHANOL_SYMMETRY[parity]}"
                    extra += " (2J+1; the A and E species share one partition function, see DEGENERACY)"
                else:
                    name = f"{_asym(f'{ju} {kau} {kcu}')}-{_asym(f'{jl} {kal} {kcl}')}"
                    extra += " (2J+1)"
                if species == "H2CO":
                    spin = "ortho" if kau % 2 else "para"
                    extra = "; g_up: 2J+1, the file's g_up over the spin weight (3 ortho, 1 para)"
            # The copy keeps g_up values above 99 modulo 100 (4 ortho-H2CO lines): compare modulo 100.
            expected = g * (3 if spin == "ortho" else 1)
            if g_file % 100 != expected % 100:
                raise ValueError(f"{species} {name}: g_up {g_file} of the file is not {g} times the spin weight")
            if species in COMMON_LINES and name not in COMMON_LINES[species]:
                continue
            out.append(_row(species, name, round(nu, 7), round(e_up, 2), float(f"{a:.4g}"), spin,
                            _published_provenance(ll_id, extra), g, FAMILY[species]))
    missing = {f"{s} {n}" for s, names in COMMON_LINES.items() for n in names} - {f"{r[0]} {r[1]}" for r in out}
    if missing:
        raise ValueError(f"lines not found in the vendored rows: {sorted(missing)}")
    return out


def _ch3cn_rows():
    """CH3CN (J, K) lines: the JPL hyperfine components (14N) merged.

    nu is the g A-weighted mean of the components (their LTE-thin intensity centroid); E_up and
    A are those of the F=J+1 -> J component, whose upper level decays by that line only, so its
    A is the (J, K) line's; g_up is (2J+1) times the K-ladder weight of DEGENERACY (the file's
    g_up of that component is (2F+1) times the same weight).
    """
    groups = {}
    for nu, qn, a, _, e_up, g_file, ll_id in splat.rows("CH3CN"):
        j_up, k, j_low, f_up, f_low = splat.symmetric_top_levels(qn)
        groups.setdefault((j_up, k), []).append((nu, a, e_up, g_file, f_up, f_low, ll_id))
    out = []
    for (j_up, k), parts in sorted(groups.items()):
        top = [p for p in parts if p[4] == j_up + 1 and p[5] == j_up]
        if k >= j_up or not top:
            continue
        _, a, e_up, g_file, f_up, _, ll_id = top[0]
        weight = float(symmetric_top_weight(k))
        if g_file != (2 * f_up + 1) * weight:
            raise ValueError(f"CH3CN J={j_up} K={k}: g_up {g_file} of F={f_up} is not (2F+1) x {weight}")
        nu = sum(p[0] * p[3] * p[1] for p in parts) / sum(p[3] * p[1] for p in parts)
        if not (BAND[0] <= nu <= BAND[1]) or e_up > MAX_E_UP:
            continue
        entry = (f"{splat.LINE_LISTS[ll_id]}, entry as copied in Splatalogue (Remijan et al. 2007), "
                 f"{splat.copy_read()}")
        prov = (f"nu: g A-weighted mean of the hyperfine components of the {entry}; E_up, A: its F=J+1-J "
                f"component, {entry}; g_up: (2J+1) times the K-ladder weight of DEGENERACY")
        out.append(_row("CH3CN", f"J={j_up}-{j_up - 1} K={k}", round(nu, 7), round(e_up, 2), float(f"{a:.4g}"),
                        "none", prov, (2 * j_up + 1) * weight, "complex organics"))
    return out


def _published_ladders():
    """SiO v=1, v=2 and HC3N J>20 from the CDMS entries: {name: (nu, E_up, A, provenance)}."""
    out = {}
    ladders = [("SiO v=1", "v=1 "), ("SiO v=2", "v=2 ")] + [(s, "") for s in PUBLISHED_ROTORS + ["HCO+", "HF"]]
    for species, prefix in ladders:
        for nu, qn, a, _, e_up, g_file, ll_id in splat.rows(species):
            levels = splat.linear_rotor_levels(qn)
            name = f"{species.split()[0]} {prefix}J={levels[0]}-{levels[1]}" if levels else None
            if levels is None or name in out or not np.isfinite(a) or g_file % (2 * levels[0] + 1):
                continue  # hyperfine components; a second copy of a line (N2D+) keeps the first
            spins = int(g_file // (2 * levels[0] + 1))
            extra = "; g_up: 2J+1" + (f" (the file's g_up over {spins}, the nuclear-spin multiplicity)"
                                       if spins > 1 else "")
            out[name] = (round(nu, 7), round(e_up, 2), float(f"{a:.4g}"), _published_provenance(ll_id, extra))
    return out


# Linear rotors whose hyperfine-free lines the vendored rows hold (see sources/vendor_splatalogue.py).
PUBLISHED_ROTORS = ["HC3N", "N2D+", "HN13C", "C34S", "13CS", "DCN", "DCO+", "C17O", "H13CN", "HC15N", "H13CO+"]


def _recombination_rows():
    table = recombination_lines(BAND[0] * u.GHz, BAND[1] * u.GHz)
    return [_row(str(r["species"]), str(r["transition"]), r["rest_frequency"].to_value("GHz"), NAN, NAN,
                 "none", str(r["provenance"]), NAN, "recombination lines") for r in table]


# Catalog lines the demo cubes inject (demo_cubes/*.json): their values stay as the cubes were made
# with them until the cubes are regenerated (see DEVELOPERS.md, "Demo cubes").
DEMO_LINES = {"H2O 1_10-1_01", "H2O 1_11-0_00", "H2O 2_02-1_11", "H2O 2_11-2_02", "H2O 3_12-3_03",
              "H2O 3_21-3_12"}
# Para lines whose frequencies the demo generator chains into para-H2O level energies
# (make_demo_cubes.PARA_H2O_LADDER): a published value that differs waits for the cubes' next run.
DEMO_CHAIN = {"H2O 2_20-2_11", "H2O 3_13-2_20", "H2O 3_22-3_13", "H2O 3_31-3_22", "H2O 4_04-3_13",
              "H2O 4_13-3_22", "H2O 4_22-3_31", "H2O 4_31-4_22", "H2O 5_15-4_22", "H2O 5_24-4_31"}


def _published_water():
    """{'upper-lower': (nu [GHz], E_up [K], A [s^-1])} of the JPL H2O entry as vendored."""
    out = {}
    for nu, qn, a, _, e_up, _, _ in splat.rows("H2O"):
        levels = splat.asymmetric_top_levels(qn)
        if levels:
            out["-".join(_asym(" ".join(map(str, lv))) for lv in levels[:2])] = (nu, e_up, a)
    return out


def _water_published(published, nu, nu_from, e_a_from, prov):
    """(nu, provenance) of a water row whose recalled values give way to the JPL entry."""
    jpl = f"{JPL}, entry as copied in Splatalogue, {splat.copy_read()}"
    clauses = prov.split("; ")
    if nu_from == "memory":
        nu = round(published[0], 7)
        clauses[0] = f"nu: {jpl}"
    if e_a_from == "memory":
        clauses = [c for c in clauses if not c.startswith(("E_up", "A"))]
        clauses.append(f"E_up{', A' if 'A: ' in prov else ''}: {jpl}")
    return nu, "; ".join(clauses)


def _water_provenance(nu_from, e_a_from, spin, a):
    """Provenance clauses of a water row (see WATER)."""
    if nu_from == "lab":
        nu = f"nu: {SOURCES['h2o-lab']}"
    elif spin == "ortho":
        nu = f"nu: {JPL}, from memory, within 0.5 MHz of the LAMDA o-H2O file"
    else:
        nu = f"nu: {JPL}, from memory"
    if e_a_from == "o-h2o":
        return f"{nu}; E_up, A: {SOURCES['o-h2o']}"
    rest = "E_up: JPL level energies, from memory"
    return f"{nu}; {rest}" + ("" if np.isnan(a) else f"; A: {LAMDA}, from memory")


def rows():
    """All catalog rows as (species, transition, nu, E_up, A, spin, provenance, g_up, family,
    hyperfine_group, relative_intensity)."""
    out = _curated_rows()
    curated = {f"{r[0]} {r[1]}" for r in out}
    out += _lamda_rows(curated)
    out += _lamda_hyperfine_rows(curated)
    out += _rotor_rows()
    out += _published_rows()
    out += _published_group_rows()
    out += _recombination_rows()
    names = [f"{r[0]} {r[1]}" for r in out]
    duplicated = {n for n in names if names.count(n) > 1}
    if duplicated:
        raise ValueError(f"duplicate row names: {sorted(duplicated)}")
    return out


HEADER = """\
# %ECSV 1.0
# ---
# # cubeloupe's bundled transition catalog (written by make_transitions.py).
# #
# # One row per transition. Columns:
# #   species         molecule, atom or ion as the trade writes it: CO, 13CO, H2O, [CII], H ...
# #   transition      quantum numbers in the trade's notation: J=4-3 (linear rotors),
# #                   J_KaKc upper-lower such as 3_13-2_20 (asymmetric tops), term symbols such as
# #                   3P1-3P0 ([CI]), n-values such as 40alpha (recombination lines)
# #   rest_frequency  GHz, as published (7 or more significant digits where known)
# #   E_up            upper-level energy E_up/k in K; water's ortho levels are counted
# #                   from the para ground level 0_00, as the trade does; nan for recombination lines
# #   einstein_A      spontaneous emission coefficient in s^-1; nan where unknown
# #   spin_isomer     ortho, para or none
# #   provenance      where each value comes from, as clauses "nu: ...; E_up: ...; A: ...":
# #                   a published file is named with the public copy that was read;
# #                   "from memory" marks values recalled rather than copied from a source
# #   g_up            upper-level degeneracy (convention in make_transitions.DEGENERACY:
# #                   no nuclear-spin factors; a hyperfine component carries (2F+1)/prod(2I+1))
# #   family          one of: CO and isotopologues, dense gas, shock tracers, complex organics,
# #                   water and hydrides, atoms and ions, recombination lines
# #   hyperfine_group the group a hyperfine component belongs to ("" for a line without one)
# #   relative_intensity  LTE optically-thin share of the group's intensity (1 outside a group)
# #
# # A row is named "<species> <transition>" (e.g. "CO J=4-3"); use that name as the
# # reference line in lines_in_band. A hyperfine group's name (e.g. "N2H+ J=1-0") names
# # the whole group.
# #
# # To add lines, do not edit this file: write your own ECSV (or CSV) with at least
# # species, transition and rest_frequency (GHz, unless the ECSV header gives another
# # frequency unit), optionally the other columns, and pass it as
# # load_catalog(extra="my_lines.ecsv"). A user row with the same species and
# # transition as a bundled row replaces it.
# datatype:
# - {name: species, datatype: string}
# - {name: transition, datatype: string}
# - {name: rest_frequency, unit: GHz, datatype: float64}
# - {name: E_up, unit: K, datatype: float64}
# - {name: einstein_A, unit: 1 / s, datatype: float64}
# - {name: spin_isomer, datatype: string}
# - {name: provenance, datatype: string}
# - {name: g_up, datatype: float64}
# - {name: family, datatype: string}
# - {name: hyperfine_group, datatype: string}
# - {name: relative_intensity, datatype: float64}
# schema: astropy-2.0
species transition rest_frequency E_up einstein_A spin_isomer provenance g_up family hyperfine_group relative_intensity
"""


def _frequency_text(nu):
    """``nu`` as written in the rows, padded with zeros to 7 significant digits."""
    text = repr(nu)
    digits = len(text.replace(".", "").lstrip("0"))
    return text + "0" * max(0, 7 - digits)


def _quote(text):
    return '"' + text.replace('"', '""') + '"'


def _number(value):
    return "nan" if np.isnan(value) else np.format_float_positional(value, unique=True, trim="-") \
        if 1e-3 <= abs(value) < 1e7 else np.format_float_scientific(value, unique=True, exp_digits=2)


def write(path=TARGET):
    """Write the catalog to ``path`` as plain ECSV."""
    lines = []
    for species, transition, nu, e_up, a, spin, prov, g, family, group, share in rows():
        a_text = "nan" if np.isnan(a) else np.format_float_scientific(a, unique=True, exp_digits=2)
        lines.append(
            f"{_quote(species)} {_quote(transition)} {_frequency_text(nu)} {float(e_up)!r} "
            f"{a_text} {spin} {_quote(prov)} {_number(round(g, 6))} {_quote(family)} {_quote(group)} "
            f"{_number(round(share, 6))}"
        )
    Path(path).write_text(HEADER + "\n".join(lines) + "\n", encoding="utf-8")
    return len(lines)


if __name__ == "__main__":
    print(f"wrote {write()} transitions to {TARGET}")
