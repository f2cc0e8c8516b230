"""The full image fuzz corpus (not a test; run by hand): every bad input, plus random byte mutations of good files.

    python tests/benchmarks/fuzz_images.py [--mutations 300] [--seed 0] [--timeout 60]

Each case runs `termination image` in a child process with a time limit. A
case passes when the command exits with code 0 (a mutation may still be a
valid image) or 2 with exactly one line on stderr, leaves its input
byte-identical, and finishes in time; anything else (a traceback, another
exit code, several lines, a hang) is listed. The named cases must all exit
with code 2.
"""

import argparse
import subprocess
import sys
import tempfile
import time
from collections import Counter
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from tests.imaging.image_corpus import cases, mutations  # noqa: E402


def run(name, build, options, timeout, must_fail):
    with tempfile.TemporaryDirectory() as tmp:
        path = build(Path(tmp))
        before = path.read_bytes() if path.is_file() else None
        t0 = time.perf_counter()
        try:
            r = subprocess.run(
                [sys.executable, "-m", "termination.cli", "image", str(path), *options],
                capture_output=True,
                text=True,
                timeout=timeout,
                cwd=ROOT,
                check=False,
            )
        except subprocess.TimeoutExpired:
            return "hang", f"{name}: no answer in {timeout} s"
        elapsed = time.perf_counter() - t0
        after = path.read_bytes() if path.is_file() else None
    lines = r.stderr.strip().splitlines()
    if after != before:
        return "input changed", name
    if "Traceback" in r.stderr:
        return "traceback", f"{name}: {lines[-1] if lines else ''}"
    if r.returncode == 2 and len(lines) == 1:
        return "clear error", f"{name} ({elapsed:.1f} s): {lines[0]}"
    if r.returncode == 0 and not must_fail:
        return "accepted", name
    return "bad exit", f"{name}: exit {r.returncode}, {len(lines)} stderr lines"


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--mutations", type=int, default=300)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--timeout", type=float, default=60.0)
    args = parser.parse_args()
    tally = Counter()
    problems = []
    corpus = [(c, True) for c in cases()] + [
        (c, False) for c in mutations(np.random.default_rng(args.seed), args.mutations)
    ]
    for (name, build, options), must_fail in corpus:
        outcome, text = run(name, build, options, args.timeout, must_fail)
        tally[outcome] += 1
        if outcome not in ("clear error", "accepted"):
            problems.append(f"{outcome}: {text}")
    print(f"{len(corpus)} cases: " + ", ".join(f"{n} {k}" for k, n in tally.most_common()))
    for p in problems:
        print("  " + p)
    sys.exit(1 if problems else 0)


if __name__ == "__main__":
    main()
