"""The ranking of ``match`` on a polar spinel, pinned before the reconstruction-cell search was made faster.

MgAl2O4 spinel, Fd-3m (origin choice 2), a = 8.08 Å, Mg 8a, Al 16d, O 32e
with x = 0.262  # from memory (room-temperature values, cf. R. W. G. Wyckoff, Crystal Structures)
The sites are generated with the package's own orbit builder, so no
prototype table is involved.
"""

from termination.identification.likelihood import match
from termination.identification.measurement import Measurement, Value


def _top(report, n=5):
    return [(r.hkl, r.label, r.cell, round(r.probability, 4)) for r in report.candidates[:n]]


def test_spinel_is_the_56_atom_cell(spinel):
    # MgAl2O4: 8 formula units in the conventional cell  # common practice
    counts = {s: list(spinel.species).count(s) for s in set(spinel.species)}
    assert (spinel.spacegroup, spinel.natoms, counts) == ("Fd-3m", 56, {"Mg": 8, "Al": 16, "O": 32})


def test_spinel_111_with_a_2x2_mesh_keeps_its_top_five(spinel):
    # A (111) terrace seen from a (100) mount (54.7°), 4.67 Å steps (d111 = a/sqrt(3)) and a
    # doubled hexagonal mesh (2 x 5.71 Å): reconstruction cells lead the ranking.
    m = Measurement(
        mount=(1, 0, 0),
        tilt=Value(54.7, 2.0),
        spacings=(Value(11.42, 0.2), Value(11.42, 0.2)),
        row_angle=Value(120.0, 3.0),
        steps=(Value(4.67, 0.2),),
    )
    got = _top(match(spinel, m, max_index=1, top=5))
    # regression: ranking before the speed work
    assert got == [
        ((1, 1, 1), "Mg", "(2×2)", 0.2801),
        ((1, 1, 1), "O3'", "(2×2)", 0.183),
        ((1, 1, 1), "Al", "(2×1)", 0.1401),
        ((1, 1, 1), "O3", "(2×2) +Mg", 0.0837),
        ((1, 1, 1), "O3", "(2×2) +Mg", 0.0837),
    ]


def test_spinel_111_with_a_rectangular_mesh_keeps_its_top_five(spinel):
    # The same terrace with a rectangular 5.71 x 11.42 Å mesh: a (2×1) cell.
    m = Measurement(
        mount=(1, 0, 0),
        tilt=Value(54.7, 2.0),
        spacings=(Value(5.71, 0.2), Value(11.42, 0.2)),
        row_angle=Value(90.0, 3.0),
        steps=(Value(4.67, 0.2),),
    )
    got = _top(match(spinel, m, max_index=1, top=5))
    # regression: ranking before the speed work
    assert got == [
        ((1, 1, 1), "Al", "(2×1)", 0.8079),
        ((1, 1, 1), "Al3", "(2×1)", 0.1682),
        ((1, 1, 1), "Al", "(2 0 / 1 2)", 0.0052),
        ((1, 1, 1), "Mg", "(2 0 / 1 2)", 0.0052),
        ((1, 1, 1), "O3'", "(2 0 / 1 2)", 0.0034),
    ]
