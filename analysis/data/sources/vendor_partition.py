"""Copy the rows of the published partition-function tables the catalog uses.

CDMS (Mueller et al. 2001, A&A 370, L49; 2005, J. Mol. Struct. 742, 215) and
JPL (Pickett et al. 1998, JQSRT 60, 883) publish lg Q(T) of every entry at
fixed temperatures. The copies read are those shipped in the PyPI wheel
``astroquery-0.4.11`` (``astroquery/linelists/cdms/data/partfunc.cat`` and
``astroquery/jplspec/data/catdir.cat``). This script copies the needed rows
unchanged into ``partition_tables.txt``:

    python analysis/data/sources/vendor_partition.py /path/to/astroquery
"""

import sys
from pathlib import Path

CDMS_TAGS = [12501, 17501, 25501, 26504, 27501, 27502, 28501, 28503, 28509, 28515, 29501, 29503,
             29506, 29507, 30502, 30504, 43511, 44501, 44505, 45501, 46501, 48501, 51501, 60503, 64502,
             18505, 40502, 41505]
JPL_TAGS = [18003, 19002, 30004, 32003, 38002]
TARGET = Path(__file__).parent / "partition_tables.txt"


def main(root):
    cdms = Path(root, "linelists/cdms/data/partfunc.cat").read_text().splitlines()
    jpl = Path(root, "jplspec/data/catdir.cat").read_text().splitlines()
    out = ["# CDMS rows, copy read: PyPI wheel astroquery-0.4.11, astroquery/linelists/cdms/data/partfunc.cat",
           cdms[0]]
    out += [line for line in cdms[1:] if line.split("|")[1].strip().isdigit()
            and int(line.split("|")[1]) in CDMS_TAGS]
    out += ["# JPL rows, copy read: PyPI wheel astroquery-0.4.11, astroquery/jplspec/data/catdir.cat",
            "# columns: tag name nlines lgQ(300) lgQ(225) lgQ(150) lgQ(75) lgQ(37.5) lgQ(18.75) lgQ(9.375) version"]
    out += [line for line in jpl if line[:6].strip().isdigit() and int(line[:6]) in JPL_TAGS]
    TARGET.write_text("\n".join(out) + "\n", encoding="utf-8")


if __name__ == "__main__":
    main(sys.argv[1])
