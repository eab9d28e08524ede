"""Write ``transitions.ecsv``, the line catalog bundled with cubeloupe.

The rows below are the curated source of the catalog; run this script after
editing them (``python analysis/data/make_transitions.py``) and commit both
files. Users extend the catalog with their own ECSV/CSV line list instead
(see `cubeloupe.analysis.load_catalog`), never by editing the bundled file.

Where values come from (named again, row by row, in the ``provenance`` column):

* rest frequencies: the CDMS (Mueller et al. 2005, J. Mol. Struct. 742, 215)
  and JPL (Pickett et al. 1998, JQSRT 60, 883) catalogues, as quoted in public
  line lists, or the laboratory papers named in the row;
* E_up/k: the catalogues' level energies, or, where a rotational ladder is
  complete down to J=0, the sum of h nu / k up the ladder (computed here);
* Einstein A: LAMDA (Schoier et al. 2005, A&A 432, 369) or NIST, quoted from
  memory; for linear molecules without a recalled value, the rigid-rotor
  formula A = 64 pi^4 nu^3 mu^2 J_u / (3 h c^3 (2 J_u + 1)) with the
  published dipole moment named in the row; NaN where no value is known.
"""

from pathlib import Path

import numpy as np

HERE = Path(__file__).parent
TARGET = HERE / "transitions.ecsv"

# h / k in K per GHz (CODATA 2018: h = 6.62607015e-34 J s, k = 1.380649e-23 J/K).
H_OVER_K = 6.62607015e-34 * 1e9 / 1.380649e-23

CDMS = "CDMS catalogue (Mueller et al. 2005)"
JPL = "JPL catalogue (Pickett et al. 1998)"
LAMDA_A = "A: LAMDA (Schoier et al. 2005), from memory"
LADDER_E = "E_up: sum of h nu/k up the ladder"

NAN = float("nan")

# ---------------------------------------------------------------------------
# Linear rotors: (species, rest frequencies of J=1-0, 2-1, ... in GHz,
#                 Einstein A per line or a dipole moment, provenance)
# ---------------------------------------------------------------------------
LADDERS = [
    ("CO",
     [115.2712018, 230.5380000, 345.7959899, 461.0407682, 576.2679305, 691.4730763,
      806.6518060, 921.7997000, 1036.9123930, 1151.9854520, 1267.0144860,
      1381.9951050, 1496.9229090],
     [7.203e-8, 6.910e-7, 2.497e-6, 6.126e-6, 1.221e-5, 2.137e-5, 3.422e-5,
      5.134e-5, 7.330e-5, 1.006e-4, 1.339e-4, 1.735e-4, 2.200e-4],
     f"nu: {CDMS}, from memory; {LADDER_E}; {LAMDA_A}"),
    ("13CO",
     [110.2013541, 220.3986842, 330.5879653, 440.7651735, 550.9262851, 661.0672766],
     [6.294e-8, 6.038e-7, 2.181e-6, 5.353e-6, 1.067e-5, 1.868e-5],
     f"nu: {CDMS}, from memory; {LADDER_E}; {LAMDA_A}"),
    ("C18O",
     [109.7821734, 219.5603541, 329.3305525, 439.0887658, 548.8310055, 658.5532782],
     [6.266e-8, 6.011e-7, 2.172e-6, 5.330e-6, 1.062e-5, 1.860e-5],
     f"nu: {CDMS}, from memory; {LADDER_E}; {LAMDA_A}"),
    ("HCN",  # hyperfine-free line centres
     [88.6316023, 177.2611115, 265.8864343, 354.5054779, 443.1161493, 531.7163479],
     2.985,
     f"nu: {CDMS} (hyperfine-free centre), from memory; {LADDER_E}; "
     "A: rigid rotor with mu=2.985 D (Ebenstein & Muenter 1984)"),
    ("HCO+",
     [89.1885247, 178.3750563, 267.5576259, 356.7342230, 445.9028721, 535.0615810],
     3.90,
     f"nu: {CDMS}, from memory; {LADDER_E}; A: rigid rotor with mu=3.90 D (Botschwina et al. 1993)"),
    ("HNC",
     [90.663568, 181.324758, 271.981142, 362.630303, 453.269922, 543.897554],
     3.05,
     f"nu: {CDMS}, from memory; {LADDER_E}; A: rigid rotor with mu=3.05 D (Blackman et al. 1976)"),
    ("CS",
     [48.9909549, 97.9809533, 146.9690287, 195.9542109, 244.9355565, 293.9120865,
      342.8828503],
     1.958,
     f"nu: {CDMS}, from memory; {LADDER_E}; A: rigid rotor with mu=1.958 D (Winnewisser & Cook 1968)"),
    ("SiO",  # v=0
     [43.423853, 86.846985, 130.268683, 173.688238, 217.104980, 260.518009,
      303.926812, 347.330581],
     3.098,
     f"nu: {CDMS} (v=0), from memory; {LADDER_E}; A: rigid rotor with mu=3.098 D (Raymonda et al. 1970)"),
]

# ---------------------------------------------------------------------------
# Water, H2(16)O, vibrational ground state. Upper/lower levels as J_KaKc.
# Frequencies: JPL catalogue as quoted in public line lists; E_up/k: JPL/LAMDA
# level energies with ortho energies counted from the para ground level 0_00
# (1_01 lies at 34.23 K), from memory; A: LAMDA, from memory (NaN if not recalled).
# ---------------------------------------------------------------------------
WATER_PROV = f"nu: {JPL}, via public line lists; E_up: JPL level energies, from memory"
WATER = [
    # upper, lower, nu [GHz], E_up [K], A [s^-1]
    ("1_10", "1_01", 556.9359877, 61.0, 3.458e-3),
    ("2_12", "1_01", 1669.904775, 114.4, 5.593e-2),
    ("2_21", "2_12", 1661.007637, 194.1, NAN),
    ("3_03", "2_12", 1716.769633, 196.8, NAN),
    ("3_12", "3_03", 1097.364790, 249.4, 1.648e-2),
    ("3_12", "2_21", 1153.126820, 249.4, 2.634e-3),
    ("3_21", "3_12", 1162.911602, 305.3, 2.294e-2),
    ("3_30", "3_21", 2196.345756, 410.7, NAN),
    ("4_14", "3_21", 380.1973598, 323.5, NAN),
    ("4_23", "3_30", 448.0010775, 432.2, NAN),
    ("4_23", "4_14", 2264.149650, 432.2, NAN),
    ("5_14", "5_05", 2221.750500, 574.7, NAN),
    ("5_23", "5_14", 1410.618069, 642.4, NAN),
    ("5_32", "5_23", 1867.748594, 732.1, NAN),
    ("5_32", "4_41", 620.7009549, 732.1, NAN),
    ("6_16", "5_23", 22.2350800, 643.5, 1.9e-9),
    ("6_43", "5_50", 439.150807, 1088.8, NAN),
    ("10_29", "9_36", 321.225630, 1861.2, NAN),
    ("1_11", "0_00", 1113.343007, 53.4, 1.842e-2),
    ("2_02", "1_11", 987.926759, 100.8, 5.835e-3),
    ("2_11", "2_02", 752.033143, 136.9, 7.062e-3),
    ("2_20", "2_11", 1228.788719, 195.9, NAN),
    ("3_13", "2_20", 183.310087, 204.7, 3.65e-6),
    ("3_13", "2_02", 2164.131980, 204.7, NAN),
    ("3_22", "3_13", 1919.359531, 296.8, NAN),
    ("4_04", "3_13", 2391.572628, 319.5, NAN),
    ("4_13", "4_04", 1602.219369, 396.4, NAN),
    ("4_13", "3_22", 2074.432305, 396.4, NAN),
    ("3_31", "3_22", 2365.899659, 410.4, NAN),
    ("3_31", "4_04", 1893.686510, 410.4, NAN),
    ("4_22", "4_13", 1207.638730, 454.3, NAN),
    ("4_22", "3_31", 916.171580, 454.3, NAN),
    ("4_31", "4_22", 2040.476810, 552.3, NAN),
    ("5_24", "4_31", 970.315022, 598.8, NAN),
    ("5_15", "4_22", 325.152888, 469.9, NAN),
    ("5_33", "4_40", 474.689092, 725.1, NAN),
    ("7_53", "6_60", 437.346667, 1524.8, NAN),
]

# ---------------------------------------------------------------------------
# Everything else: (species, transition, nu [GHz], E_up [K], A [s^-1],
#                   spin isomer, provenance)
# ---------------------------------------------------------------------------
OTHERS = [
    ("[CI]", "3P1-3P0", 492.160651, 23.62, 7.88e-8, "none",
     "nu: Yamamoto & Saito 1991; E_up, A: NIST, from memory"),
    ("[CI]", "3P2-3P1", 809.34197, 62.46, 2.65e-7, "none",
     "nu: Klein et al. 1998; E_up, A: NIST, from memory"),
    ("[CII]", "2P3/2-2P1/2", 1900.5369, 91.21, 2.29e-6, "none",
     "nu: Cooksy et al. 1986; E_up, A: NIST, from memory"),
    ("[NII]", "3P1-3P0", 1461.1314, 70.12, 2.08e-6, "none",
     "nu: Brown et al. 1994; E_up, A: NIST, from memory"),
    ("[NII]", "3P2-3P1", 2459.3801, 188.15, 7.46e-6, "none",
     "nu: Brown et al. 1994; E_up, A: NIST, from memory"),
    ("[OI]", "3P1-3P2", 4744.77749, 227.71, 8.91e-5, "none",
     "nu: Zink et al. 1991; E_up, A: NIST, from memory"),
    ("[OI]", "3P0-3P1", 2060.06886, 326.58, 1.75e-5, "none",
     "nu: Zink et al. 1991; E_up, A: NIST, from memory"),
    ("[OIII]", "3P1-3P0", 3393.00624, 162.84, 2.62e-5, "none",
     "nu: Moreno et al. 1986 (via NIST); E_up, A: NIST, from memory"),
    ("CN", "N=1-0 J=1/2-1/2 F=3/2-1/2", 113.144157, 5.43, NAN, "none",
     f"nu: {CDMS}, strongest hyperfine component, from memory; E_up: {CDMS}"),
    ("CN", "N=1-0 J=3/2-1/2 F=5/2-3/2", 113.490970, 5.45, 1.19e-5, "none",
     f"nu: {CDMS}, strongest hyperfine component, from memory; E_up: {CDMS}; {LAMDA_A}"),
    ("CN", "N=2-1 J=3/2-1/2 F=5/2-3/2", 226.659558, 16.31, NAN, "none",
     f"nu: {CDMS}, strongest hyperfine component, from memory; E_up: {CDMS}"),
    ("CN", "N=2-1 J=5/2-3/2 F=7/2-5/2", 226.874781, 16.34, 1.14e-4, "none",
     f"nu: {CDMS}, strongest hyperfine component, from memory; E_up: {CDMS}; {LAMDA_A}"),
    ("OH+", "N=1-0 J=0-1", 909.1588, 43.63, NAN, "none",
     f"nu: {CDMS}, strongest hyperfine component, from memory; E_up: h nu/k from the ground level"),
    ("OH+", "N=1-0 J=2-1", 971.8053, 46.64, NAN, "none",
     f"nu: {CDMS}, strongest hyperfine component, from memory; E_up: h nu/k from the ground level"),
    ("OH+", "N=1-0 J=1-1", 1033.1186, 49.58, NAN, "none",
     f"nu: {CDMS}, strongest hyperfine component, from memory; E_up: h nu/k from the ground level"),
    ("H2O+", "1_11-0_00 J=3/2-1/2", 1115.2041, 53.52, NAN, "ortho",
     f"nu: {CDMS}, strongest hyperfine component, from memory; E_up: h nu/k from the ground level"),
    ("H2O+", "1_11-0_00 J=1/2-1/2", 1139.5612, 54.69, NAN, "ortho",
     f"nu: {CDMS}, strongest hyperfine component, from memory; E_up: h nu/k from the ground level"),
    ("CH+", "J=1-0", 835.137504, 40.08, 6.36e-3, "none",
     "nu: Amano 2010, from memory; E_up: h nu/k from the ground level; A: from memory"),
    ("HF", "J=1-0", 1232.476200, 59.15, 2.42e-2, "none",
     "nu: Nolt et al. 1987, from memory; E_up: h nu/k from the ground level; A: from memory"),
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


def rows():
    """All catalog rows as (species, transition, nu, E_up, A, spin, provenance)."""
    out = []
    for species, freqs, a_or_dipole, prov in LADDERS:
        energy = 0.0
        for j, nu in enumerate(freqs, start=1):
            energy += H_OVER_K * nu
            a = a_or_dipole[j - 1] if isinstance(a_or_dipole, list) else _rigid_rotor_a(nu, j, a_or_dipole)
            out.append((species, f"J={j}-{j - 1}", nu, round(energy, 2), float(f"{a:.4g}"), "none", prov))
    for upper, lower, nu, e_up, a in WATER:
        ka, kc = (int(q) for q in upper.split("_")[1])
        spin = "ortho" if (ka + kc) % 2 else "para"
        prov = WATER_PROV + ("" if np.isnan(a) else f"; {LAMDA_A}")
        out.append(("H2O", f"{upper}-{lower}", nu, e_up, a, spin, prov))
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
# #   provenance      the published source of each value; "from memory" marks values
# #                   recalled rather than copied from the source
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
        a_text = "nan" if np.isnan(a) else f"{a:.3e}"
        lines.append(
            f"{_quote(species):9s} {_quote(transition):28s} {_frequency_text(nu):>13} {repr(float(e_up)):>8} "
            f"{a_text:>9s} {spin:5s} {_quote(prov)}"
        )
    Path(path).write_text(HEADER + "\n".join(lines) + "\n", encoding="utf-8")


if __name__ == "__main__":
    write()
    print(f"wrote {len(rows())} transitions to {TARGET}")
