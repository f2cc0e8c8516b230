"""Polarity figure: one bar per layer of the repeat unit with its charge, the dipole they make, the compensation."""

import numpy as np
import pytest
from figure_data import by_gid, one

from termination.figures.polarity import fraction_text, polarity_stack, running_charge
from termination.reports import polarity_report
from termination.structures import PROTOTYPES


def _bars(fig):
    bars = by_gid(fig, "layer charges")
    return np.array([(b.get_width(), b.get_y() + b.get_height() / 2) for b in bars])


def test_rocksalt_111_stack_is_the_tasker_textbook_case(proto):
    # Rock salt (111): alternating layers of +1 and -1 e per cell, d/2 apart; Tasker type III, compensation -1/2
    # of the top layer # Tasker, J. Phys. C 12, 4977 (1979); Goniakowski et al., Rep. Prog. Phys. 71, 016501 (2008)
    report = polarity_report(proto("rocksalt:Na,Cl", a=5.64), plane=(1, 1, 1), max_cell=2)
    face = report.faces[0]
    for tp in face.terminations:
        fig = polarity_stack(tp, face.d, face.area, hkl=face.hkl)
        bars = _bars(fig)
        assert bars[:, 0] == pytest.approx([layer.charge for layer in tp.layers])
        assert bars[:, 1] == pytest.approx([-layer.depth for layer in tp.layers])
        assert sorted(bars[:, 0]) == pytest.approx([-1.0, 1.0])
        assert np.sum(bars[:, 0] * -bars[:, 1]) == pytest.approx(tp.dipole, abs=1e-9)  # mu = sum sigma_i z_i
        summary = one(fig, "polarity summary").get_text()
        assert "Tasker type III" in summary and "1/2" in summary


def test_compensated_stack_has_no_mean_field(proto):
    # With dq = mu/d on the top layer the running charge (the field) averages to zero over a period
    # # Goniakowski, Finocchi and Noguera, Rep. Prog. Phys. 71, 016501 (2008), the polarity condition
    report = polarity_report(proto("perovskite:Sr,Ti,O"), plane=(1, 1, 0), max_cell=2)
    face = report.faces[0]
    for tp in face.terminations:
        depths, bare = running_charge(tp, face.d)
        _, compensated = running_charge(tp, face.d, extra_top=tp.compensating_charge)
        gaps = np.diff(depths)
        assert np.sum(compensated[:-1] * gaps) / face.d == pytest.approx(0.0, abs=1e-9)
        if tp.tasker_type == "III":
            assert abs(np.sum(bare[:-1] * gaps)) > 0.1  # the bare stack does have a mean field
        fig = polarity_stack(tp, face.d, face.area)
        line = one(fig, "compensated charge") if tp.tasker_type == "III" else one(fig, "running charge")
        assert line is not None


def test_fraction_text():
    assert fraction_text(-0.5) == "1/2" and fraction_text(0.25) == "1/4" and fraction_text(0.3) == "3/10"


@pytest.mark.parametrize("name", sorted(PROTOTYPES))
def test_a_polarity_figure_for_every_prototype_family(proto, name):
    c = proto(PROTOTYPES[name].example)
    try:
        report = polarity_report(c, plane=(1, 1, 1), max_cell=1)
    except Exception as exc:  # metals and alloys without formal charges: polarity is not defined
        from termination.errors import ChargeError

        assert isinstance(exc, ChargeError)
        pytest.skip(f"{name}: no formal charges")
    for face in report.faces:
        for tp in face.terminations:
            fig = polarity_stack(tp, face.d, face.area)
            assert len(_bars(fig)) == len(tp.layers)
