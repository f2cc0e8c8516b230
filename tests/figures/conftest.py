"""Fixtures of the figure tests: the demo's crystal and match report."""

import pytest


@pytest.fixture(scope="session")
def demo_match():
    """The demo's crystal and match report (TiNiSn cleaved from a (0 0 1) mount)."""
    from termination.identification.likelihood import match
    from termination.identification.measurement import read_measurement
    from termination.structures import build_prototype, bundled

    crystal = build_prototype("half-heusler:Ti,Ni,Sn")
    return crystal, match(crystal, read_measurement(bundled("demo_TiNiSn_001.toml")), top=10)
