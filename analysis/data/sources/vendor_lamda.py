"""Copy the level and radiative-transition sections of published LAMDA files.

LAMDA (Leiden Atomic and Molecular Database; Schoier et al. 2005, A&A 432,
369) files hold a molecule's levels, its radiative transitions and its
collision rates. The catalog needs only the first two, so this script copies
those sections unchanged (collision rates dropped) into ``lamda/``, with one
header line naming the copy read. It was run once on the files redistributed
in the PyPI wheel ``spectralradex-1.1.5`` (``spectralradex/radex/data/``):

    python analysis/data/sources/vendor_lamda.py /path/to/spectralradex/radex/data

Files from other public copies were transcribed by hand with the same cut and
name their copy in their first line.
"""

import sys
from pathlib import Path

HERE = Path(__file__).parent / "lamda"
WHEEL = "PyPI wheel spectralradex-1.1.5, spectralradex/radex/data/"
FILES = ["co.dat", "cs@lique.dat", "sio.dat", "hco+.dat", "hnc.dat", "hcn.dat", "hcn@hfs.dat",
         "hc3n.dat", "SO-pH2.dat", "so2@lowT.dat", "o-nh3.dat", "p-nh3.dat", "oh2s.dat", "ph2s.dat",
         "o-c3h2.dat", "p-c3h2.dat", "oh+.dat", "o-h3o+.dat", "p-h3o+.dat", "hcl@hfs.dat",
         "oh@hfs.dat", "catom.dat", "c+.dat", "n+.dat", "oatom.dat"]


def radiative_part(lines):
    """The lines up to the last radiative transition (levels and lines, no collision rates)."""
    for k, line in enumerate(lines):
        text = line.upper()
        if "NUMBER" in text and "RADIATIVE" in text:
            count = int(lines[k + 1].split()[0])
            return lines[: k + 3 + count]
    raise ValueError("no radiative-transition section")


def main(folder):
    HERE.mkdir(exist_ok=True)
    for name in FILES:
        lines = Path(folder, name).read_text(encoding="latin-1").splitlines()
        kept = radiative_part(lines)
        (HERE / name).write_text(f"# copy read: {WHEEL}{name} (levels and radiative transitions only)\n"
                                 + "\n".join(line.rstrip() for line in kept) + "\n", encoding="utf-8")
        print(f"{name}: {len(kept)} lines")


if __name__ == "__main__":
    main(sys.argv[1])
