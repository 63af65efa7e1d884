#!/usr/bin/env python3
"""Generate the demo seed library for whorl.

Everything written by this script is synthetic: band, ion and shift tables
(in seedgen/tables/) are turned into spectra by simple line-shape models plus seeded noise.
Nothing here is a measurement.  The scenario (the lab, its analysts, its
instruments, suppliers and lot numbers) is invented.

Usage:
    python3 scripts/make_seed_library.py            # writes ./seed-library next to scripts/
    python3 scripts/make_seed_library.py OUTDIR     # writes OUTDIR instead

Only the Python 3.11 standard library is used and every random draw comes
from a seeded generator, so the output is the same byte for byte on every run.

Every table entry carries a mark:
  "from memory"      a value recalled for that particular compound
                     (approximate; good to a few cm-1 / a few ppm-hundredths /
                     a few percent of relative intensity at best);
  "common practice"  a general fact of the trade (group frequency, typical
                     shift, characteristic ion) that the entry is made to obey.

The generator lives in the package beside this script, `scripts/seedgen/`:
  base.py        marks, scenario, NMR solvents, table constructors, the compound registry
  tables/        one module per class of compound, then the 13C peak lists
  checks.py      the checks the tables must pass (check_tables), facts of the trade included
  synthesis.py   line shapes, grids, noise-free spectra, seeded generators
  output.py      reference spectra, manifest.csv, compounds.json, README.md
  unknowns.py    the degraded example unknowns
"""

import os
import shutil
import sys

# The package is imported from beside this script; no bytecode is left in the source tree.
sys.dont_write_bytecode = True
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

from seedgen.base import COMPOUNDS, DataError  # noqa: E402
from seedgen.checks import check_tables  # noqa: E402
from seedgen.output import README, TECH_FILES, write_library, write_text  # noqa: E402
from seedgen.unknowns import write_unknowns  # noqa: E402


def main(argv):
    here = os.path.dirname(os.path.abspath(__file__))
    out = argv[1] if len(argv) > 1 else os.path.join(os.path.dirname(here), "seed-library")
    import seedgen.tables  # noqa: F401  (fills COMPOUNDS; its 13C step can raise DataError)
    check_tables()
    for sub in ("spectra", "unknowns"):
        p = os.path.join(out, sub)
        if os.path.isdir(p):
            shutil.rmtree(p)
    os.makedirs(out, exist_ok=True)
    write_library(out)
    rows = write_unknowns(out)
    write_text(os.path.join(out, "README.md"), README)
    print(f"{len(COMPOUNDS)} compounds, {len(TECH_FILES) * len(COMPOUNDS)} reference spectra, "
          f"{len(rows)} unknowns written to {out}")


if __name__ == "__main__":
    try:
        main(sys.argv)
    except DataError as e:
        sys.stderr.write(f"make_seed_library: table check failed: {e}\n")
        sys.exit(1)
