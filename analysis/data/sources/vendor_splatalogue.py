"""Copy the catalogue rows the line catalog uses from a published Splatalogue database.

Splatalogue (Remijan et al. 2007, BAAS 39, 963) merges the published line
catalogues: CDMS (Mueller et al. 2001, A&A 370, L49; 2005, J. Mol. Struct.
742, 215; line list 10), JPL (Pickett et al. 1998, JQSRT 60, 883; line list
12) and a compilation of laboratory-fitted lines labelled "SLISE" in the same
package's NRAO_RRF.csv.gz (line list 14). The copy read is the SQLite file
shipped in the PyPI wheel ``casadata-2025.9.22``
(``casadata/__data__/ephemerides/splatalogue.db``, table ``main``). This script
copies the needed rows unchanged (columns below, values as stored) into
``splatalogue_rows.txt``:

    python analysis/data/sources/vendor_splatalogue.py /path/to/splatalogue.db

Columns: species_id, ll_id, the species' s_name, orderedfreq [MHz],
resolved_QNs, aij (log10 of A in s^-1), lower_state_energy_K,
upper_state_energy_K, upper_state_degeneracy. Rows of H2CO and CH3OH are kept
at every frequency and energy (their level lists give the spin species'
partition functions), and so are those of c-C3H2; the others only between 20 GHz and 2.5 THz.
"""

import sqlite3
import sys
from pathlib import Path

TARGET = Path(__file__).parent / "splatalogue_rows.txt"
COPY = "PyPI wheel casadata-2025.9.22, casadata/__data__/ephemerides/splatalogue.db"
# (species_id, ll_id, E_up limit [K] or None for all rows)
WANTED = [
    (194, 10, None),    # H2CO (CDMS)
    (55, 14, None),     # CH3OH vt=0 (line list 14)
    (493, 12, None),    # c-C3H2 v=0 (JPL; its level list gives the spin species' partition functions)
    (673, 10, 700.0),   # HNCO v=0 (CDMS)
    (472, 12, 1000.0),  # HDO (JPL)
    (606, 12, 700.0),   # CH3CN v=0 (JPL, hyperfine components)
    (311, 10, 700.0),   # CH3CCH v=0 (CDMS)
    (418, 12, 2000.0),  # H2O v=0 (JPL)
    (1089, 10, 3000.0),  # SiO v=1 (CDMS)
    (1090, 10, 4500.0),  # SiO v=2 (CDMS)
    (294, 10, 700.0),   # HC3N v=0 (CDMS)
    # isotopologues and ions of the linear-rotor ladders (hyperfine-free rows are used)
    (59, 10, 700.0),    # N2D+ (CDMS)
    (473, 12, 700.0),   # HN13C (JPL)
    (473, 14, 700.0),   # HN13C (line list 14)
    (117, 14, 700.0),   # C34S v=0
    (142, 14, 700.0),   # 13CS v=0
    (23, 14, 700.0),    # DCN v=0
    (256, 14, 700.0),   # DCO+ v=0
    (226, 14, 700.0),   # C17O
    (137, 14, 700.0),   # H13CN v=0
    (255, 14, 700.0),   # HC15N v=0
    (38, 14, 700.0),    # H13CO+
    (15, 14, 700.0),    # HCO+ v=0
    (535, 14, 700.0),   # HF
]
COLUMNS = ("m.species_id, m.ll_id, s.s_name, m.orderedfreq, m.resolved_QNs, m.aij, m.lower_state_energy_K, "
           "m.upper_state_energy_K, m.upper_state_degeneracy")


def main(db):
    con = sqlite3.connect(f"file:{db}?mode=ro", uri=True)
    out = [f"# copy read: {COPY} (table main, columns as stored; tab-separated)",
           "# species_id\tll_id\ts_name\torderedfreq_MHz\tresolved_QNs\taij_log10\tE_low_K\tE_up_K\tg_up"]
    for species_id, ll_id, e_max in WANTED:
        query = (f"select {COLUMNS} from main m join species s on s.species_id = m.species_id "
                 "where m.species_id = ? and m.ll_id = ?")
        args = [species_id, ll_id]
        if e_max is not None:
            query += " and m.orderedfreq between 20000 and 2500000 and m.upper_state_energy_K <= ?"
            args.append(e_max)
        for row in con.execute(query + " order by m.orderedfreq", args):
            out.append("\t".join(str(v).strip() if isinstance(v, str) else repr(v) for v in row))
    TARGET.write_text("\n".join(out) + "\n", encoding="utf-8")
    print(f"{len(out) - 2} rows to {TARGET}")


if __name__ == "__main__":
    main(sys.argv[1])
