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
"""

from pathlib import Path

import numpy as np

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
    "cn": f"{LAMDA} CN hyperfine file {_REDIST}cn-hfs.dat",
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
# Linear rotors without a published table found: (species, rest frequencies of
# J=1-0, 2-1, ... in GHz, dipole moment in D, provenance).
# ---------------------------------------------------------------------------
COMPUTED_LADDERS = [
    ("CS",
     [48.9909549, 97.9809533, 146.9690287, 195.9542109, 244.9355565, 293.9120865,
      342.8828503],
     1.958,
     (f"nu: {CDMS}, from memory; E_up: sum of h nu/k up the ladder; "
      "A: rigid rotor with mu=1.958 D (Winnewisser & Cook 1968, from memory)")),
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
    ("CN", "N=1-0 J=1/2-1/2 F=1/2-3/2", 113.14416, 5.430, 1.05e-05, "none",
     f"nu, E_up, A: {SOURCES['cn']}"),
    ("CN", "N=1-0 J=3/2-1/2 F=5/2-3/2", 113.49097, 5.447, 1.19e-05, "none",
     f"nu (strongest hyperfine component), E_up, A: {SOURCES['cn']}"),
    ("CN", "N=2-1 J=3/2-1/2 F=5/2-3/2", 226.65956, 16.310, 9.47e-05, "none",
     f"nu (strongest hyperfine component), E_up, A: {SOURCES['cn']}"),
    ("CN", "N=2-1 J=5/2-3/2 F=7/2-5/2", 226.87478, 16.335, 1.14e-04, "none",
     f"nu (strongest hyperfine component), E_up, A: {SOURCES['cn']}"),
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
    ("NH3", "(J,K)=(1,1)", 23.6944955, 23.26, 1.67e-7, "para",
     f"nu: {CDMS} (hyperfine-free centre), from memory; E_up, A: {CDMS}, from memory"),
    ("NH3", "(J,K)=(2,2)", 23.7226333, 64.45, 2.23e-7, "para",
     f"nu: {CDMS} (hyperfine-free centre), from memory; E_up, A: {CDMS}, from memory"),
]


def _rigid_rotor_a(nu_ghz, j_up, dipole_debye):
    """Einstein A [s^-1] of a linear rotor's J -> J-1 line.

    A = 64 pi^4 nu^3 mu^2 J / (3 h c^3 (2J + 1)) in cgs units (e.g. Townes &
    Schawlow 1955); 1 D = 1e-18 esu cm.
    """
    h, c = 6.62607015e-27, 2.99792458e10
    mu = dipole_debye * 1e-18
    nu = nu_ghz * 1e9
    return 64 * np.pi**4 * nu**3 * mu**2 * j_up / (3 * h * c**3 * (2 * j_up + 1))


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
    """All catalog rows as (species, transition, nu, E_up, A, spin, provenance)."""
    out = []
    for species, prov, table in PUBLISHED_LADDERS:
        for j, (nu, e_up, a) in enumerate(table, start=1):
            out.append((species, f"J={j}-{j - 1}", nu, e_up, a, "none", prov))
    for species, freqs, dipole, prov in COMPUTED_LADDERS:
        energy = 0.0
        for j, nu in enumerate(freqs, start=1):
            energy += H_OVER_K * nu
            a = float(f"{_rigid_rotor_a(nu, j, dipole):.4g}")
            out.append((species, f"J={j}-{j - 1}", nu, round(energy, 2), a, "none", prov))
    for upper, lower, nu, nu_from, e_up, a, e_a_from in WATER:
        ka, kc = (int(q) for q in upper.split("_")[1])
        spin = "ortho" if (ka + kc) % 2 else "para"
        out.append(("H2O", f"{upper}-{lower}", nu, e_up, a, spin,
                    _water_provenance(nu_from, e_a_from, spin, a)))
    out.extend(OTHERS)
    return out


HEADER = """\
# %ECSV 1.0
# ---
# # cubeloupe's bundled transition catalog (written by make_transitions.py).
# #
# # One row per transition. Columns:
# #   species         molecule or ion as the trade writes it: CO, 13CO, H2O, [CII] ...
# #   transition      quantum numbers in the trade's notation: J=4-3 (linear rotors),
# #                   J_KaKc upper-lower such as 3_13-2_20 (water), term symbols such as
# #                   3P1-3P0 ([CI]) or 2P3/2-2P1/2 ([CII])
# #   rest_frequency  GHz, as published (7 or more significant digits where known)
# #   E_up            upper-level energy E_up/k in K; water's ortho levels are counted
# #                   from the para ground level 0_00, as the trade does
# #   einstein_A      spontaneous emission coefficient in s^-1; nan where unknown
# #   spin_isomer     ortho, para or none
# #   provenance      where each value comes from, as clauses "nu: ...; E_up: ...; A: ...":
# #                   a published file is named with the public copy that was read;
# #                   "from memory" marks values recalled rather than copied from a source
# #
# # A row is named "<species> <transition>" (e.g. "CO J=4-3"); use that name as the
# # reference line in lines_in_band.
# #
# # To add lines, do not edit this file: write your own ECSV (or CSV) with at least
# # species, transition and rest_frequency (GHz, unless the ECSV header gives another
# # frequency unit), optionally E_up, einstein_A, spin_isomer and provenance, and pass it
# # as load_catalog(extra="my_lines.ecsv"). A user row with the same species and
# # transition as a bundled row replaces it.
# datatype:
# - {name: species, datatype: string}
# - {name: transition, datatype: string}
# - {name: rest_frequency, unit: GHz, datatype: float64}
# - {name: E_up, unit: K, datatype: float64}
# - {name: einstein_A, unit: 1 / s, datatype: float64}
# - {name: spin_isomer, datatype: string}
# - {name: provenance, datatype: string}
# schema: astropy-2.0
species transition rest_frequency E_up einstein_A spin_isomer provenance
"""


def _frequency_text(nu):
    """``nu`` as written in the rows, padded with zeros to 7 significant digits."""
    text = repr(nu)
    digits = len(text.replace(".", "").lstrip("0"))
    return text + "0" * max(0, 7 - digits)


def _quote(text):
    return '"' + text.replace('"', '""') + '"'


def write(path=TARGET):
    """Write the catalog to ``path`` as plain, aligned ECSV."""
    lines = []
    for species, transition, nu, e_up, a, spin, prov in rows():
        a_text = "nan" if np.isnan(a) else np.format_float_scientific(a, unique=True, exp_digits=2)
        lines.append(
            f"{_quote(species):9s} {_quote(transition):28s} {_frequency_text(nu):>15} {float(e_up)!r:>8} "
            f"{a_text:>10s} {spin:5s} {_quote(prov)}"
        )
    Path(path).write_text(HEADER + "\n".join(lines) + "\n", encoding="utf-8")


if __name__ == "__main__":
    write()
    print(f"wrote {len(rows())} transitions to {TARGET}")
