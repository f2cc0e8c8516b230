"""The README documents every setting with its default, and the demo and test commands it promises."""

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text(encoding="utf-8")


def test_every_default_is_in_the_settings_table():
    import termination.defaults as d

    source = (ROOT / "termination" / "defaults.py").read_text(encoding="utf-8")
    section = None
    for line in source.splitlines():
        head = re.match(r"^# -+ (.+)$", line)
        if head:
            section = head.group(1)
        m = re.match(r"^([A-Z_]+) = ", line)
        if m and section != "numerical noise":
            name = m.group(1)
            value = getattr(d, name)
            row = next((r for r in README.splitlines() if r.startswith(f"| `{name}` |")), None)
            assert row is not None, f"README Settings table lacks {name}"
            assert float(row.split("|")[2].strip()) == float(value), (name, row)


def test_the_two_setup_commands_are_in_the_readme():
    assert "pip install . && termination match --demo" in README
    assert 'pip install -e ".[test]" && python -m pytest -q' in README


def test_examples_and_cases_are_the_projects_own():
    # The examples and test cases are scenarios of this project: a few example values and compounds
    # that belong to another case must not come back (assembled here so that this file holds none).
    retired = [
        "30" + "+-3",
        "4.6" + "+-0.2",
        "1.25" + "+-0.1",
        "1.25" + "±0.1",
        "a = " + "6.65",
        "Sm" + "B6",
        "Sm" + ",B",
        "YPt" + "Bi",
        "Y,Pt" + ",Bi",
        "YPd" + "Bi",
        "Y,Pd" + ",Bi",
    ]
    suffixes = {".py", ".md", ".toml", ".txt", ".cif", ".json", ".vasp", ".xyz"}
    found = []
    for path in ROOT.rglob("*"):
        parts = path.relative_to(ROOT).parts
        if path.suffix not in suffixes or any(p.startswith(".") or p.endswith(".egg-info") for p in parts):
            continue
        text = path.read_text(encoding="utf-8", errors="replace")
        found += [f"{path.relative_to(ROOT)}: {token}" for token in retired if token in text]
    assert not found, found
