"""Mutation testing of the core layers with mutmut, and the score it gives.

Run from the repository root (it needs the ``mutation`` extra)::

    python tests/mutation/run_mutation.py                       # every core module (hours on 2 cores)
    python tests/mutation/run_mutation.py surface/layers surface/terminations
    python tests/mutation/run_mutation.py --report-only          # score of the results already in mutants/

mutmut copies the package into ``mutants/``, rewrites each function of the
chosen modules into its mutants (one small change each: an operator, a
constant, a dropped argument), and runs, for every mutant, the tests of the
selection in ``[tool.mutmut]`` (pyproject.toml) that reach the function.  A
mutant is *killed* when a test fails (or it times out), *survives* when all
pass.  Results are kept in ``mutants/``, so a second run only tests what
changed.

The score is killed / (tested - equivalent): mutants listed in
``tests/mutation/NOTES.md`` as equivalent (no input can tell them from the
original) are left out of the denominator; every other survivor counts
against it, and so do mutants no selected test reaches.

The default test run does not run this (it is slow); the figure in the
README's development section comes from it.
"""

from __future__ import annotations

import argparse
import json
import os
import re
import subprocess
import sys
from collections import Counter
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
NOTES = Path(__file__).with_name("NOTES.md")

# The core layers (issue order of priority); names relative to termination/.
CORE = (
    "surface/terminations",
    "surface/layers",
    "surface/faces",
    "surface/polarity",
    "identification/likelihood",
    "surface/corrugation",
    "imaging/terraces",
    "imaging/fourier",
)

# mutmut's exit codes per mutant (mutmut 3: mutmut/stats.py)
KILLED = {1, 3, 36, 24, -24, 152, 255}  # test failure, pytest internal error, timeouts (SIGXCPU)
SURVIVED = {0}
NO_TESTS = {5, 33}
SKIPPED = {34, 37}


def equivalent_mutants(text: str) -> set[str]:
    """Mutant names listed in the notes' section on equivalent mutants."""
    part = text.split("## Equivalent mutants", 1)[-1] if "## Equivalent mutants" in text else ""
    part = part.split("\n## ", 1)[0]
    return set(re.findall(r"termination\.[\w.ǁ]+__mutmut_\d+", part))


def module_results(module: str) -> dict[str, int | None]:
    """Exit code of every mutant of ``module`` (None: not tested yet) from ``mutants/``."""
    meta = ROOT / "mutants" / "termination" / f"{module}.py.meta"
    if not meta.exists():
        return {}
    data = json.loads(meta.read_text(encoding="utf-8"))
    return dict(data.get("exit_code_by_key", {}))


def classify(code: int | None) -> str:
    if code is None:
        return "untested"
    if code in KILLED:
        return "killed"
    if code in SURVIVED:
        return "survived"
    if code in NO_TESTS:
        return "no tests"
    if code in SKIPPED:
        return "skipped"
    return "suspicious"


def score(modules: list[str], equivalent: set[str]) -> tuple[list[tuple[str, Counter[str]]], list[str]]:
    """Per module the counts of each outcome (equivalent survivors apart); and the survivors not explained."""
    rows, unexplained = [], []
    for module in modules:
        counts: Counter[str] = Counter()
        for name, code in sorted(module_results(module).items()):
            kind = classify(code)
            if kind == "survived" and name in equivalent:
                kind = "equivalent"
            counts[kind] += 1
            if kind in ("survived", "no tests", "suspicious"):
                unexplained.append(name)
        rows.append((module, counts))
    return rows, unexplained


def report(modules: list[str]) -> float:
    """Print the table and the score; return the score (percent)."""
    equivalent = equivalent_mutants(NOTES.read_text(encoding="utf-8")) if NOTES.exists() else set()
    rows, unexplained = score(modules, equivalent)
    total: Counter[str] = Counter()
    head = ("module", "mutants", "killed", "survived", "equiv.", "no test", "score")
    print(f"{head[0]:28s} {head[1]:>7s} {head[2]:>7s} {head[3]:>8s} {head[4]:>6s} {head[5]:>7s} {head[6]:>7s}")
    for module, c in rows:
        total += c
        print(_line(module, c))
    print(_line("total", total))
    if total["untested"]:
        print(f"{total['untested']} mutants not tested yet (run without --report-only)")
    if unexplained:
        print("\nSurvivors neither killed nor listed as equivalent in tests/mutation/NOTES.md:")
        for name in unexplained:
            print("  ", name)
    return _score(total)


def _score(c: Counter[str]) -> float:
    tested = c["killed"] + c["survived"] + c["no tests"] + c["suspicious"]
    return 100.0 * c["killed"] / tested if tested else float("nan")


def _line(name: str, c: Counter[str]) -> str:
    n = sum(c.values())
    return (
        f"{name:28s} {n:7d} {c['killed']:7d} {c['survived']:8d} {c['equivalent']:6d} {c['no tests']:7d}"
        f" {_score(c):6.1f}%"
    )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("modules", nargs="*", default=list(CORE), help="modules under termination/ (default: core)")
    parser.add_argument("--max-children", type=int, default=2, help="mutants tested at once (default 2)")
    parser.add_argument("--report-only", action="store_true", help="only print the score of earlier results")
    args = parser.parse_args(argv)
    modules = [m.removesuffix(".py").removeprefix("termination/") for m in args.modules]
    unknown = [m for m in modules if not (ROOT / "termination" / f"{m}.py").exists()]
    if unknown:
        print(f"run_mutation: no module termination/{unknown[0]}.py", file=sys.stderr)
        return 2
    if not args.report_only:
        mutmut = Path(sys.executable).with_name("mutmut")
        globs = [f"termination.{m.replace('/', '.')}.*" for m in modules]
        cmd = [str(mutmut), "run", "--max-children", str(args.max_children), *globs]
        print("$", " ".join(cmd), flush=True)
        subprocess.run(cmd, cwd=ROOT, env={**os.environ, "PYTHONHASHSEED": "0"}, check=False)
    report(modules)
    return 0


if __name__ == "__main__":
    sys.exit(main())
