"""The full structure-file fuzz corpus: every malformed file must give exit code 2, one stderr line, an unchanged file.

Run:  python tests/fuzz/run_structure_corpus.py [--n 3000] [--seed 1]

Prints one line per failure and a summary; exits 1 when any file fails.
"""

import argparse
import os
import sys
import tempfile
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

from structure_corpus import corpus
from typer.testing import CliRunner

from termination import cli


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=3000)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    runner = CliRunner()
    failures = 0
    start = time.perf_counter()
    with tempfile.TemporaryDirectory() as folder:
        for k, (name, content, defect) in enumerate(corpus(args.seed, args.n)):
            os.mkdir(os.path.join(folder, str(k)))
            path = os.path.join(folder, str(k), name)  # the name decides the reader
            with open(path, "wb") as fh:
                fh.write(content)
            r = runner.invoke(cli.app, ["planes", path, "--max-index", "1"])
            lines = r.stderr.strip().splitlines()
            with open(path, "rb") as fh:
                unchanged = fh.read() == content
            ok = r.exit_code == 2 and len(lines) == 1 and "unexpected" not in lines[0] and unchanged
            if not ok:
                failures += 1
                print(f"FAIL {k} {defect}: exit {r.exit_code}, stderr {r.stderr.strip()!r}")
    elapsed = time.perf_counter() - start
    print(f"{args.n} malformed files, {failures} failures, {elapsed:.1f} s")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
