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
