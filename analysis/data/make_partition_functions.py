"""Write ``partition_functions.ecsv``, the partition functions Q(T) bundled with cubeloupe.

Run after editing (``python analysis/data/make_partition_functions.py``) and
commit both files. Three kinds of source, named per row in ``provenance``:

* published tables: lg Q at the CDMS (Mueller et al. 2005) or JPL (Pickett et
  al. 1998) temperatures, rows copied in ``sources/partition_tables.txt``.
  Where the CDMS entry resolves hyperfine structure its Q counts the splitting
  nuclei's spin multiplicity prod(2I+1); the catalog's degeneracies leave it
  out (make_transitions.DEGENERACY), so Q is divided by it here (HCN and
  isotopologues: 3 for 14N; N2H+: 9; C17O: 6 for 17O; 13CO and 13CS: 2 for 13C; CN: 3; CCH and OH+:
  2 for H; found by comparing each table with kT/hB + 1/3 in tests/analysis/test_partition.py).
  JPL's H2O, H2CO and CH3OH tables and CDMS's H2O+ table sum over both spin
  isomers with their spin weights (ortho 3, para 1; A and E alike), so they
  are listed for spin_isomer "none";
* water's own ortho and para Q: ortho summed over the levels of the LAMDA
  o-H2O file (sources/lamda/o-h2o-levels.dat, spin weight 3 divided out,
  counted from 1_01, 34.23 K above 0_00), para as the JPL total less the
  ortho part, Q_p = Q_JPL - 3 exp(-E(1_01)/kT) Q_o, at the JPL temperatures;
* the ortho and para Q of H2CO and c-C3H2 and CH3OH's A and E Q: sums over the
  levels met in the published line lists vendored from Splatalogue
  (sources/splatalogue_rows.txt: CDMS H2CO, JPL c-C3H2, CH3OH vt=0 of line list
  14), g = 2J+1, each from its lowest level, tabulated up to the highest JPL
  temperature at which the two add up (with the totals' spin weights) to the JPL
  total within 1 % (H2CO 300 K, c-C3H2 150 K, CH3OH 37.5 K);
* sums over a published level list (the vendored LAMDA files): each spin
  species' own Q, with energies counted from its lowest level, tabulated only
  up to a sixth of the highest listed level's energy, where the missing levels
  change Q by well under 1 %;
* sums over levels computed from the catalog's rotational constants (the
  linear rotors make_transitions computes), up to J = 150.
"""

from pathlib import Path

import numpy as np

from cubeloupe.analysis.data import make_transitions as mt
from cubeloupe.analysis.data import splatalogue_rows as splat

HERE = Path(__file__).parent
TARGET = HERE / "partition_functions.ecsv"
TABLES = HERE / "sources" / "partition_tables.txt"
CDMS_T = [1000, 500, 300, 225, 150, 75, 37.5, 18.75, 9.375, 5.0, 2.725]
JPL_T = [300, 225, 150, 75, 37.5, 18.75, 9.375]
GRID = np.round(np.geomspace(2.725, 1000, 41), 4)

CDMS_SPECIES = {  # catalog species: (CDMS tag, hyperfine spin multiplicity divided out)
    "[CI]": (12501, 1), "OH+": (17501, 2), "CCH": (25501, 2), "CN": (26504, 3), "HCN": (27501, 3),
    "HNC": (27502, 1), "H13CN": (28501, 3), "CO": (28503, 1), "DCN": (28509, 3), "HN13C": (28515, 1),
    "13CO": (29501, 2), "C17O": (29503, 6), "N2H+": (29506, 9), "HCO+": (29507, 1), "C18O": (30502, 1),
    "H13CO+": (30504, 1), "HNCO": (43511, 1), "CS": (44501, 1), "SiO": (44505, 1), "13CS": (45501, 2),
    "C34S": (46501, 1), "SO": (48501, 1), "HC3N": (51501, 1), "OCS": (60503, 1), "SO2": (64502, 1),
    # CH3CCH and CH3CN: the CDMS weights of the K ladders are the catalog's (make_transitions.DEGENERACY)
    "CH3CCH": (40502, 1), "CH3CN": (41505, 1),
}
JPL_SPECIES = {"H2O": 18003, "HDO": 19002, "H2CO": 30004, "CH3OH": 32003, "c-C3H2": 38002}
CDMS_SPIN_TOTALS = {"H2O+": 18505}  # CDMS tables that count both spin isomers with their spin weights
LEVEL_FILES = [("NH3", "ortho", "o-nh3.dat", 1), ("NH3", "para", "p-nh3.dat", 1),
               ("H2S", "ortho", "oh2s.dat", 1), ("H2S", "para", "ph2s.dat", 1),
               ("H3O+", "ortho", "o-h3o+.dat", 1), ("H3O+", "para", "p-h3o+.dat", 1),
               ("HCl", "none", "hcl@hfs.dat", 4), ("[CII]", "none", "c+.dat", 1),
               ("[NII]", "none", "n+.dat", 1), ("[OI]", "none", "oatom.dat", 1)]
# Linear rotors with no table in hand: B, D from make_transitions.rotor_constants(), or half the
# J=1-0 frequency of the catalog's curated row (CH+, HF; rigid rotor, D neglected).
LADDER_SPECIES = ["HC15N", "DCO+", "N2D+"]
RIGID = {"CH+": 835137.504 / 2, "HF": 1232476.2 / 2}


def _read_tables():
    cdms, jpl, copy = {}, {}, {}
    source = None
    for line in TABLES.read_text().splitlines():
        if line.startswith("# CDMS rows"):
            source = "cdms"
            copy["cdms"] = line.split("copy read: ")[1]
        elif line.startswith("# JPL rows"):
            source = "jpl"
            copy["jpl"] = line.split("copy read: ")[1]
        elif source == "cdms" and line.startswith("|") and line.split("|")[1].strip().isdigit():
            cells = [c.strip() for c in line.split("|")[1:-1]]
            cdms[int(cells[0])] = [float(c) for c in cells[3:14]]
        elif source == "jpl" and line[:6].strip().isdigit():
            jpl[int(line[:6])] = [float(v) for v in line[26:].split()[:7]]
    return cdms, jpl, copy


def _level_sum(energies_k, weights, temperatures):
    e = np.asarray(energies_k)[:, None]
    return np.sum(np.asarray(weights)[:, None] * np.exp(-e / np.asarray(temperatures)[None, :]), axis=0)


def _water_spin_rows(jpl_lg_q, jpl_copy):
    """Ortho- and para-H2O's own Q (see the module docstring) at the JPL temperatures up to 300 K."""
    file_copy, levels, _ = mt.read_lamda("o-h2o-levels.dat")
    energy = np.array([e for e, _, _ in levels.values()]) * mt.K_PER_CM
    g = np.array([w for _, w, _ in levels.values()]) / 3  # the file counts the ortho spin weight 3
    zero = float(energy.min())
    t = np.array(JPL_T, dtype=float)
    q_ortho = _level_sum(energy - zero, g, t)
    q_para = 10 ** np.array(jpl_lg_q) - 3 * np.exp(-zero / t) * q_ortho
    ortho = (f"sum over the levels of the {mt.LAMDA} o-H2O file, copy in {file_copy} (levels to 2007 K; "
             "spin weight 3 divided out; energies from 1_01)")
    para = (f"JPL partition function table (Pickett et al. 1998), tag 18003, {jpl_copy}, less "
            "3 exp(-E(1_01)/kT) times the ortho Q of the LAMDA o-H2O levels (energies from 0_00)")
    return ([("H2O", "ortho", float(ti), float(qi), round(zero, 4), ortho) for ti, qi in zip(t, q_ortho)]
            + [("H2O", "para", float(ti), float(qi), 0.0, para) for ti, qi in zip(t, q_para)])


def spin_levels(species):
    """{spin species: (E [K], g)} of H2CO or c-C3H2 (ortho, para) or CH3OH (A, E), from the vendored rows.

    Every level met as the upper or lower level of a line of the entry (sources/splatalogue_rows.txt:
    H2CO from CDMS, c-C3H2 from JPL, CH3OH vt=0 from Splatalogue's line list 14), with g = 2J+1
    (no nuclear-spin factors) and E on the molecule's scale (from para 0_00, from A-CH3OH 0_0+).
    """
    levels = {}
    for _, qn, _, e_low, e_up, _, _ in splat.rows(species):
        parsed = splat.asymmetric_top_levels(qn)
        if parsed is None:
            continue  # hyperfine components repeat their rotational levels
        upper, lower, parity = parsed
        for level, energy, sign in ((upper, e_up, parity[:1]), (lower, e_low, parity[1:])):
            if species == "H2CO":
                spin = "ortho" if level[1] % 2 else "para"
            elif species == "c-C3H2":  # ortho: Ka + Kc odd, where the JPL entry prints g_up = 3(2J+1)
                spin = "ortho" if (level[1] + level[2]) % 2 else "para"
            else:
                spin = "A" if parity else "E"
            levels[(spin, sign) + level] = (energy, 2 * level[0] + 1)
    out = {}
    for (spin, *_), value in levels.items():
        out.setdefault(spin, []).append(value)
    return {spin: (np.array([e for e, _ in v]), np.array([g for _, g in v], dtype=float)) for spin, v in out.items()}


# Spin species summed over the vendored level lists, tabulated up to the temperature where the
# sum of both (with the spin weights of the published totals) stays within 1 % of the JPL
# total (tests/analysis/test_partition.py checks it): (species, weights of the total).
SPIN_SUMS = {"H2CO": {"ortho": 3.0, "para": 1.0}, "CH3OH": {"A": 1.0, "E": 1.0},
             "c-C3H2": {"ortho": 3.0, "para": 1.0}}
ENTRY = {"H2CO": "CDMS", "CH3OH": "line list 14", "c-C3H2": "JPL"}


def _spin_sum_rows(jpl_tables, jpl_copy):
    out = []
    for species, weights in SPIN_SUMS.items():
        levels = spin_levels(species)
        zeros = {spin: float(e.min()) for spin, (e, _) in levels.items()}
        published = 10 ** np.array(jpl_tables[JPL_SPECIES[species]])
        t_jpl = np.array(JPL_T, dtype=float)
        total = sum(weights[s] * np.exp(-zeros[s] / t_jpl) * _level_sum(e - zeros[s], g, t_jpl)
                    for s, (e, g) in levels.items())
        agree = np.abs(total / published - 1) <= 0.01
        t_max = float(max(t for t, ok in zip(t_jpl, agree) if ok and all(agree[t_jpl <= t])))
        grid = np.unique(np.r_[GRID[GRID <= t_max], t_jpl[t_jpl <= t_max]])
        for spin, (e, g) in levels.items():
            q = _level_sum(e - zeros[spin], g, grid)
            prov = (f"sum over the {len(e)} levels of the {ENTRY[species]} "
                    f"entry's lines as copied in Splatalogue ({splat.copy_read()}); g = 2J+1, no spin weight; "
                    f"energies from the lowest {spin} level; with spin weights "
                    f"{', '.join(f'{s} {w:g}' for s, w in weights.items())} the sum of both agrees with the "
                    f"JPL total (tag {JPL_SPECIES[species]}, {jpl_copy}) within 1 % up to {t_max:g} K")
            out += [(species, spin, float(t), float(qi), round(zeros[spin], 4), prov) for t, qi in zip(grid, q)]
    return out


def rows():
    """(species, spin_isomer, temperature [K], Q, energy_zero [K], provenance) rows."""
    cdms, jpl, copy = _read_tables()
    out = []
    for species, (tag, spins) in CDMS_SPECIES.items():
        prov = (f"CDMS partition function table (Mueller et al. 2005), tag {tag}, {copy['cdms']}"
                + (f"; divided by {spins}, the hyperfine nuclear-spin multiplicity" if spins > 1 else ""))
        for t, lg in zip(CDMS_T, cdms[tag]):
            if np.isfinite(lg):
                out.append((species, "none", t, 10**lg / spins, 0.0, prov))
    tag = CDMS_SPIN_TOTALS["H2O+"]
    prov = (f"CDMS partition function table (Mueller et al. 2005), tag {tag}, {copy['cdms']}; sums both spin "
            "isomers with their spin weights (ortho 3, para 1) and the hyperfine levels")
    out += [("H2O+", "none", t, 10**lg, 0.0, prov) for t, lg in zip(CDMS_T, cdms[tag]) if np.isfinite(lg)]
    out += _water_spin_rows(jpl[JPL_SPECIES["H2O"]], copy["jpl"])
    out += _spin_sum_rows(jpl, copy["jpl"])
    for species, tag in JPL_SPECIES.items():
        prov = (f"JPL partition function table (Pickett et al. 1998), tag {tag}, {copy['jpl']}; "
                "sums both spin isomers with their spin weights")
        for t, lg in zip(JPL_T, jpl[tag]):
            out.append((species, "none", t, 10**lg, 0.0, prov))
    for species, spin, name, spins in LEVEL_FILES:
        file_copy, levels, _ = mt.read_lamda(name)
        energy = np.array([e for e, _, _ in levels.values()]) * mt.K_PER_CM
        g = np.array([w for _, w, _ in levels.values()])
        lowest = int(np.argmin(energy))
        if spin != "none":
            g = g / (g[lowest] / (2 * mt._j_of(list(levels.values())[lowest][2]) + 1))
        g = g / spins
        zero = float(energy[lowest])
        t_max = (energy.max() - zero) / 6
        grid = GRID[GRID <= t_max]
        q = _level_sum(energy - zero, g, grid)
        prov = (f"sum over the levels of {mt.LAMDA} file {name}, copy in {file_copy} (valid up to "
                f"{t_max:.0f} K; energies from the {spin if spin != 'none' else ''} lowest level)")
        out += [(species, spin, float(t), float(qi), round(zero, 4), prov) for t, qi in zip(grid, q)]
    constants = mt.rotor_constants()
    j = np.arange(0, 151)  # D-corrected energies stay monotonic well past 20 000 K
    for species in LADDER_SPECIES:
        b, d, _ = constants[species]
        energy = mt.linear_rotor_levels(b, d, j)
        q = _level_sum(energy, 2 * j + 1, GRID)
        prov = ("sum over the levels J=0-150 "
                f"from the catalog's constants B={b:.4f} MHz, D={d:.3f} kHz " + (
                    "(fitted to the published lines of the vendored Splatalogue rows)" if species in mt.CONSTANTS_FROM_ROWS
                    else "(fitted to recalled CDMS lines, from memory)"))
        out += [(species, "none", float(t), float(qi), 0.0, prov) for t, qi in zip(GRID, q)]
    for species, b in RIGID.items():
        energy = mt.linear_rotor_levels(b, 0.0, j)
        q = _level_sum(energy, 2 * j + 1, GRID)
        prov = (f"sum over rigid-rotor levels J=0-150 with B = nu(J=1-0)/2 = {b:.1f} MHz "
                "(the catalog's curated J=1-0 frequency)")
        out += [(species, "none", float(t), float(qi), 0.0, prov) for t, qi in zip(GRID, q)]
    # [OIII] 3P0,1,2 at 0, 113.178 (PyNeb copy of NIST, see make_transitions.SOURCES) and
    # 306.174 cm^-1 (NIST, from memory).
    energy = np.array([0.0, 113.178, 306.174]) * mt.K_PER_CM
    q = _level_sum(energy, [1, 3, 5], GRID)
    out += [("[OIII]", "none", float(t), float(qi), 0.0,
             "sum over the 3P0,1,2 levels: 113.178 cm^-1 from NIST via PyNeb, 306.174 cm^-1 from memory")
            for t, qi in zip(GRID, q)]
    return out


HEADER = """\
# %ECSV 1.0
# ---
# # Partition functions Q(T) of the catalog's species (written by make_partition_functions.py).
# # Q is dimensionless; energy_zero is the energy E/k [K], on the catalog's E_up scale, of the
# # level Q counts from (0 unless a spin species' lowest level lies above the molecule's ground).
# # Degeneracies as in make_transitions.DEGENERACY; sources per row in provenance.
# datatype:
# - {name: species, datatype: string}
# - {name: spin_isomer, datatype: string}
# - {name: temperature, unit: K, datatype: float64}
# - {name: Q, datatype: float64}
# - {name: energy_zero, unit: K, datatype: float64}
# - {name: provenance, datatype: string}
# schema: astropy-2.0
species spin_isomer temperature Q energy_zero provenance
"""


def write(path=TARGET):
    lines = [f'"{s}" {spin} {t!r} {q:.6g} {zero!r} "{prov}"' for s, spin, t, q, zero, prov in sorted(
        rows(), key=lambda r: (r[0], r[1], r[2]))]
    Path(path).write_text(HEADER + "\n".join(lines) + "\n", encoding="utf-8")
    return len(lines)


if __name__ == "__main__":
    print(f"wrote {write()} rows to {TARGET}")
