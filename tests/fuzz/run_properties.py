"""The property tests with 1000 examples each: symmetry-equivalent faces, input settings, step heights.

Run:  python tests/fuzz/run_properties.py [pytest options]

Sets ``TERMINATION_FULL=1`` (1000 hypothesis examples per property instead of
the suite's few, drawn afresh rather than derandomised) and runs
``tests/surface/test_properties.py`` and
``tests/surface/test_setting_invariance.py`` with hypothesis's statistics, in
the checkout this script belongs to.  Exits with pytest's code.
"""

import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
FILES = ["tests/surface/test_properties.py", "tests/surface/test_setting_invariance.py"]


def main() -> int:
    env = dict(os.environ, TERMINATION_FULL="1", PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    command = [sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider", "--hypothesis-show-statistics"]
    return subprocess.call([*command, *FILES, *sys.argv[1:]], cwd=ROOT, env=env)


if __name__ == "__main__":
    sys.exit(main())
