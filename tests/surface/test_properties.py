"""Invariances of faces, terminations and steps over random crystals, faces and settings (hypothesis).

- Symmetry-equivalent faces are one face: any variant of a face's orbit
  gives the same spacing, layers, terminations and step heights.
- The table of faces does not depend on how the crystal is given: a rotated,
  origin-shifted, re-based (left-handed bases too) or supercell input gives
  the same faces with the same d, multiplicity and mesh.  (The terminations
  and depths of such inputs are checked in ``test_setting_invariance.py``.)
- Step heights add up: a step from a terrace of i up to one of j and on up to
  one of k is a step from i to k modulo d (delta_ij + delta_jk = delta_ik mod
  d, delta the height offset of the two tops), and every listed height is its
  offset plus a whole number of periods.

The suite draws a few examples per property; ``TERMINATION_FULL=1`` draws 1000
(``python tests/fuzz/run_properties.py``).  References are the invariances
themselves (common practice): no value is compared with a hard-coded number.
"""

import itertools
import os

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from test_setting_invariance import _redescribe, settings_of

from termination.structures import build_prototype
from termination.surface.faces import distinct_faces, face_variants
from termination.surface.terminations import face_terminations

FULL = os.environ.get("TERMINATION_FULL") == "1"
SETTINGS = settings(
    max_examples=1000 if FULL else 8,
    deadline=None,
    derandomize=not FULL,  # the suite is deterministic; the long run explores
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much],
)

# cubic (centrosymmetric and not), tetragonal, hexagonal and trigonal prototypes
SPECS = [
    "rocksalt:Na,Cl",
    "zincblende:Ga,As",
    "half-heusler:Ti,Ni,Sn",
    "perovskite:Sr,Ti,O",
    "fluorite:Ca,F",
    "hexaboride:La,B",
    "diamond:Si",
    "rutile:Ti,O",
    "wurtzite:Zn,O",
    "hcp:Mg",
    "2h-mx2:Mo,S",
    "1t-mx2:Ti,S",
]
_CRYSTALS = {}


def crystal_of(spec):
    if spec not in _CRYSTALS:
        _CRYSTALS[spec] = build_prototype(spec)
    return _CRYSTALS[spec]


faces = st.tuples(*[st.integers(-3, 3)] * 3).filter(lambda v: any(v))


def _stack(ft):
    """Exact part (compositions, labels, counts) and lengths (Å) of a face's terminations."""
    names = (
        [tuple(sorted(la.composition.items())) for la in ft.layers],
        [(t.label, t.equivalent_to) for t in ft.terminations],
        [(s.from_label, s.to_label, len(s.heights)) for s in ft.steps],
    )
    lengths = [ft.d] + [la.depth for la in ft.layers] + [t.broken_bonds_per_nm2 for t in ft.terminations]
    lengths += [h for s in ft.steps for h in s.heights]
    return names, lengths


@SETTINGS
@given(spec=st.sampled_from(SPECS), hkl=faces, data=st.data())
def test_symmetry_equivalent_faces_give_identical_terminations(spec, hkl, data):
    crystal = crystal_of(spec)
    variant = data.draw(st.sampled_from(face_variants(crystal, hkl)), label="variant")
    names, lengths = _stack(face_terminations(crystal, hkl))
    names_v, lengths_v = _stack(face_terminations(crystal, variant))
    assert names_v == names
    assert lengths_v == pytest.approx(lengths, abs=1e-6)


def _table(crystal):
    out = []
    for f in distinct_faces(crystal, max_index=2):
        out.append((f.hkl, f.multiplicity, f.d, f.mesh.a, f.mesh.b, f.mesh.gamma))
    return out


@SETTINGS
@given(spec=st.sampled_from(SPECS), setting=settings_of())
def test_the_faces_table_does_not_depend_on_the_input_setting(spec, setting):
    reference = _table(crystal_of(spec))
    table = _table(_redescribe(crystal_of(spec), setting))
    assert [row[:2] for row in table] == [row[:2] for row in reference]
    assert np.allclose([row[2:] for row in table], [row[2:] for row in reference], atol=1e-6)


def _circular(values, d):
    """Offsets modulo d in [0, d), with values within 1e-5 Å of d counted as 0."""
    out = np.mod(np.asarray(values, float), d)
    return np.where(out > d - 1e-5, 0.0, out)


@SETTINGS
@given(spec=st.sampled_from(SPECS), hkl=faces)
def test_step_heights_follow_the_termination_depths_and_add_up_to_d(spec, hkl):
    ft = face_terminations(crystal_of(spec), hkl)
    d = ft.d
    top = {t.id: -t.depth for t in ft.terminations}  # height of each termination's top layer
    tol = 0.1 + 1e-6  # offsets within the layer tolerance of a whole period are whole periods
    single = {}
    for s in ft.steps:
        heights = np.asarray(s.heights)
        assert np.all(heights > 0) and np.all(np.diff(heights) >= 0)
        # the heights are the offsets z_upper - z_lower (mod d) of the terminations the labels stand for,
        # each plus whole periods: both sets agree modulo d
        predicted = _circular([top[b] - top[a] for a in s.from_ids for b in s.to_ids], d)
        predicted = np.where((predicted < tol) | (predicted > d - tol), 0.0, predicted)
        listed = _circular(heights, d)
        gap = np.abs(listed[:, None] - predicted[None, :])
        gap = np.minimum(gap, d - gap)
        assert gap.min(axis=1).max() < 1e-5 and gap.min(axis=0).max() < 1e-5, (s, predicted)
        if len(s.from_ids) == 1 and len(s.to_ids) == 1:
            single[(s.from_ids[0], s.to_ids[0])] = heights[0]
    for (i, j), h in single.items():
        if i != j and (j, i) in single:
            # up from i to j and on up to i again: one period d
            assert h + single[(j, i)] == pytest.approx(d, abs=1e-5)
    for i, j, k in itertools.permutations(sorted(top), 3):
        if {(i, j), (j, k), (i, k)} <= single.keys():
            total = (single[(i, j)] + single[(j, k)] - single[(i, k)]) / d
            assert total == pytest.approx(round(total), abs=1e-5), (i, j, k)


# regression tests for what the 1000-example runs found


def test_a_layer_across_half_the_period_keeps_its_centre():
    # heights 0.40 and 0.47 Å in a period of 0.873 Å are one layer at 0.435 Å (their mean), not torn
    # apart by the wrap-around of z = period, which put the cut inside the layer
    from termination.surface.layers import cluster_layers

    labels, centres = cluster_layers([0.40, 0.47], 0.873, 0.1)
    assert labels.tolist() == [0, 0] and centres.tolist() == pytest.approx([0.435])


def test_every_variant_of_hcp_0_3_2_breaks_the_same_bonds():
    # one of the twelve variants of hcp Mg (0 3 2) used to count 48.8 instead of 37.6 bonds per nm^2
    crystal = crystal_of("hcp:Mg")
    counts = {
        round(face_terminations(crystal, v).terminations[0].broken_bonds_per_nm2, 6)
        for v in face_variants(crystal, (0, 3, 2))
    }
    assert len(counts) == 1


def test_an_origin_shift_just_below_one_moves_no_atom():
    # an atom at fractional 0.99999 is not at 1 (np.isclose's default rtol of 1e-5 said it was), so an
    # origin shift of 0.99999 c leaves wurtzite's layers, depths and steps as they are
    shifted = _redescribe(crystal_of("wurtzite:Zn,O"), ((0.0, 0.0, 0.0), np.array([0, 0, 0.99999]), np.eye(3), 1, 0))
    for hkl in ((0, 0, 1), (0, 0, -1)):
        names, lengths = _stack(face_terminations(shifted, hkl))
        ref_names, ref_lengths = _stack(face_terminations(crystal_of("wurtzite:Zn,O"), hkl))
        assert names == ref_names
        assert lengths == pytest.approx(ref_lengths, abs=1e-6)
