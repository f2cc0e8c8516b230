"""Where two JSON outputs of the command line differ: the paths and the largest relative change of a float.

Used to check that a speed change leaves results alone: run the same
command on two checkouts and compare, e.g.

    (cd OLD && termination polarity rutile:Ti,O --max-index 3 --json) > old.json
    (cd NEW && termination polarity rutile:Ti,O --max-index 3 --json) > new.json
    python tests/benchmarks/diff_json.py old.json new.json

The ``run`` and ``provenance`` blocks (times, versions, paths) are left out.
Prints ``identical`` or the differing paths and the largest relative change
of a float among them; exit code 1 when anything but floats differs.
"""

import json
import re
import sys


def differences(a, b, path=""):
    """Yield (folded path, relative change or None) for every leaf where ``a`` and ``b`` differ."""
    if type(a) is not type(b):
        yield f"{path} (type)", None
    elif isinstance(a, dict):
        for key in sorted(set(a) | set(b)):
            if key not in a or key not in b:
                yield f"{path}/{key} (missing)", None
            else:
                yield from differences(a[key], b[key], f"{path}/{key}")
    elif isinstance(a, list):
        if len(a) != len(b):
            yield f"{path} (length)", None
        else:
            for u, v in zip(a, b):
                yield from differences(u, v, f"{path}[]")
    elif a != b:
        rel = abs(a - b) / max(abs(a), abs(b)) if isinstance(a, float) else None
        yield path, rel


def main(argv=None):
    old_path, new_path = (argv or sys.argv[1:])[:2]
    docs = []
    for p in (old_path, new_path):
        with open(p, encoding="utf-8") as fh:
            doc = json.load(fh)
        for key in ("run", "provenance"):
            doc.pop(key, None)
        docs.append(doc)
    paths, worst, exact = set(), 0.0, True
    for path, rel in differences(*docs):
        paths.add(re.sub(r"\[\]", "[]", path))
        if rel is None:
            exact = False
        else:
            worst = max(worst, rel)
    if not paths:
        print("identical")
        return 0
    print("differ at: " + ", ".join(sorted(paths)) + f"; largest relative float change {worst:.1e}")
    return 0 if exact else 1


if __name__ == "__main__":
    sys.exit(main())
