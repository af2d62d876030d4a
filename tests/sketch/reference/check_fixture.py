#!/usr/bin/python3
"""Re-runs make_shingle_fixture.py into a temporary directory and checks the
output equals the committed fixture in tests/sketch/data. Used by ctest.
Usage: /usr/bin/python3 check_fixture.py <tests/sketch dir>"""
import filecmp
import os
import subprocess
import sys
import tempfile

here = sys.argv[1]
with tempfile.TemporaryDirectory() as tmp:
    subprocess.run([sys.executable, os.path.join(here, "reference", "make_shingle_fixture.py"), tmp],
                   check=True)
    for name in ("texts.tsv", "pairs.tsv"):
        if not filecmp.cmp(os.path.join(tmp, name), os.path.join(here, "data", name), shallow=False):
            print(f"{name} differs from a fresh run of make_shingle_fixture.py")
            sys.exit(1)
print("fixture is current")
