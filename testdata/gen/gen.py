#!/usr/bin/python3
"""Regenerate every golden file.

    /usr/bin/python3 testdata/gen/gen.py OUTDIR [PACKAGE ...]

writes OUTDIR/<package>/<family>.json for every family that a
testdata/gen/fam_*.py module declares (or only those of the named
packages). Each module has a list FAMILIES of (package, family, build),
made by common.families from its build_<family> functions, where build()
returns the list of cases. Runs are deterministic: the same
sources give byte-identical files.
"""

import importlib
import os
import sys
import time

here = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, here)

import common  # noqa: E402


def main(argv):
    if len(argv) < 2:
        sys.stderr.write(__doc__)
        return 2
    outdir = argv[1]
    only = set(argv[2:])
    mods = sorted(f[:-3] for f in os.listdir(here)
                  if f.startswith("fam_") and f.endswith(".py"))
    seen = set()
    for name in mods:
        mod = importlib.import_module(name)
        for package, family, build in mod.FAMILIES:
            if only and package not in only:
                continue
            key = (package, family)
            if key in seen:
                raise SystemExit("family %s/%s declared twice" % key)
            seen.add(key)
            t0 = time.time()
            cases = build()
            data = common.render(package, family, "testdata/gen/%s.py" % name, cases)
            d = os.path.join(outdir, package)
            os.makedirs(d, exist_ok=True)
            with open(os.path.join(d, family + ".json"), "wb") as f:
                f.write(data)
            sys.stderr.write("%-40s %4d cases %6.1fs\n" % (package + "/" + family, len(cases), time.time() - t0))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
