"""The full fuzz corpus of measurement files, step lists and option values of `termination match`.

Run:  python tests/fuzz/run_input_corpus.py [--n 2000] [--mutations 1000] [--seed 1]

Every named and generated defect (``--n`` cases: all the named ones, then
generated bad values) must give exit code 2, one line on stderr and unchanged
inputs; each random byte edit of a good file (``--mutations``) must give either
a clean result (exit 0) or such a one-line error, never a traceback or a
changed file.  Prints one line per failure and a summary; exits 1 when any
case fails.
"""

import argparse
import os
import random
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

from input_corpus import cases, mutations, random_cases, run


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=2000)
    parser.add_argument("--mutations", type=int, default=1000)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    rng = random.Random(args.seed)
    named = cases()
    bad = named + random_cases(rng, max(0, args.n - len(named)))
    edits = mutations(rng, args.mutations)
    failures = valid = 0
    start = time.perf_counter()
    with tempfile.TemporaryDirectory() as root:
        for k, case in enumerate(bad + edits):
            folder = Path(root) / str(k)
            folder.mkdir()
            code, lines, unchanged = run(case, folder)
            clean_error = code == 2 and len(lines) == 1 and "unexpected" not in lines[0]
            ok = unchanged and (clean_error or (case[0] == "mutation" and code == 0))
            valid += ok and code == 0
            if not ok:
                failures += 1
                print(f"FAIL {k} {case[0]} {case[1]!r}: exit {code}, stderr {lines[:3]!r}, unchanged {unchanged}")
    elapsed = time.perf_counter() - start
    print(
        f"{len(bad)} bad inputs and {len(edits)} mutations: {failures} failures, "
        f"{valid} mutations still valid, {elapsed:.1f} s"
    )
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
