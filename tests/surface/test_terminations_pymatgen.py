"""Layers and cut positions cross-checked against pymatgen's SlabGenerator (issue 3).

How pymatgen's slabs relate to this project's single-face terminations
--------------------------------------------------------------------
``SlabGenerator(structure, hkl, ...)`` builds an oriented unit cell (OUC)
whose c axis crosses the (hkl) planes; it may span several periods d (two
for fcc (110) and half-Heusler (001)), and its c axis may point along -G
rather than +G.  It projects the OUC's atoms on the surface normal, groups
them into planes with single linkage at ``ftol`` (0.1 Å by default, like our
``layer_tol_angstrom``), and puts one candidate cut ("shift") midway between
each pair of consecutive planes: our ``cuts`` are the same midpoints, so the
shifts, taken modulo d, are our cut heights, and there are
(OUC height / d) shifts per cut of ours.

``get_slabs(filter_out_sym_slabs=False)`` returns one slab per shift.  A slab
is a whole number of OUC periods thick, so both of its surfaces come from the
same cut: one is a termination of (hkl), the other a termination of
(-h -k -l).  Its layer sequence along our outward normal is therefore a
window of our periodic layer sequence.

``get_slabs()`` (the default ``filter_out_sym_slabs=True``) keeps one slab of
each set of symmetrically equivalent slabs.  Two slabs are equivalent when a
space-group operation maps one onto the other, either keeping the normal
(h R = h: the cut height z goes to z + h.t/|G|) or reversing it (h R = -h:
z goes to -z + h.t/|G|), because a flipped slab is still the same slab.  Our
terminations are single faces, so only the first kind makes two of them
equivalent: rock salt (111) has two terminations (Na and Cl), but pymatgen
returns one slab (Na on one side, Cl on the other).  The count of distinct
slabs is the number of orbits of our cuts under both kinds of operation.

``bonds={(A, B): length}`` with ``max_broken_bonds`` drops shifts that break
more than that many A-B bonds (counted over both surfaces of the slab).  Our
counterpart is rule 2 of termination/terminations.py: a gap that breaks more
unit bonds (B-B, ...) than the cheapest gap is not a cut.  With the smallest
``max_broken_bonds`` that leaves any shift, pymatgen must keep exactly our
allowed cuts (checked on the hexaboride (001), whose B6 octahedra must stay
whole).

Slabs are kept small (min_slab_size 5 Å) so the module runs in a few seconds.
"""

import warnings
from collections import Counter
from functools import cache

import numpy as np
import pytest

from termination.surface.terminations import face_terminations

pytest.importorskip("pymatgen.core.surface")

CASES = [
    ("rocksalt:Na,Cl", 5.64, (1, 1, 1)),
    ("perovskite:Sr,Ti,O", 3.905, (0, 0, 1)),
    ("half-heusler:Ti,Ni,Sn", 5.93, (1, 1, 1)),
    ("half-heusler:Ti,Ni,Sn", 5.93, (-1, -1, -1)),
    ("half-heusler:Ti,Ni,Sn", 5.93, (0, 0, 1)),
    ("fcc:Cu", 3.615, (1, 1, 0)),
]
IDS = [f"{spec.split(':')[0]}-{''.join(str(v) for v in hkl)}" for spec, _, hkl in CASES]
# Lattice constants (Å): NaCl 5.64, SrTiO3 3.905, TiNiSn 5.93, Cu 3.615 (from memory,
# room temperature); the checks below hold for any value.

#: Positions come from the same crystal on both sides; only rounding differs.
MATCH_TOL_ANGSTROM = 1e-4
#: pymatgen's default ftol, the same as our default layer tolerance.
FTOL_ANGSTROM = 0.1


def _structure(crystal):
    from pymatgen.core import Lattice, Structure

    return Structure(Lattice(crystal.lattice), list(crystal.species), crystal.positions)


@cache
def _generate(spec, a, hkl, bonds=None, max_broken_bonds=0, filtered=False):
    """pymatgen slabs of one face; the Cartesian frame is the crystal's (no reorientation)."""
    from pymatgen.core.surface import SlabGenerator

    from termination.structures import build_prototype

    crystal = build_prototype(spec, a=a)
    gen = SlabGenerator(_structure(crystal), hkl, min_slab_size=5.0, min_vacuum_size=5.0, reorient_lattice=False)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        slabs = gen.get_slabs(
            bonds=None if bonds is None else dict(bonds),
            max_broken_bonds=max_broken_bonds,
            ftol=FTOL_ANGSTROM,
            filter_out_sym_slabs=filtered,
        )
    return crystal, gen, tuple(slabs)


def _shift_heights(gen, slabs, normal, d):
    """Cut height of each slab's shift along our outward normal, modulo d (Å)."""
    c_height = gen.oriented_unit_cell.lattice.matrix[2] @ normal  # signed: the OUC c may point along -G
    return np.sort([(s.shift * c_height) % d for s in slabs]), c_height


def _periodic_close(x, y, d, tol):
    return abs((x - y + d / 2) % d - d / 2) <= tol


def _slab_layers(slab, normal, tol):
    """Layer centres (ascending along ``normal``, Å) and compositions of a slab."""
    z = slab.cart_coords @ normal
    order = np.argsort(z)
    z = z[order]
    species = [slab[i].specie.symbol for i in order]
    breaks = np.flatnonzero(np.diff(z) > tol) + 1
    groups = np.split(np.arange(len(z)), breaks)
    return np.array([z[g].mean() for g in groups]), [Counter(species[i] for i in g) for g in groups]


def _orbits(crystal, face, heights, signs, tol):
    """Number of orbits of cut heights under the operations with h R = s h, s in ``signs``.

    Under x' = R x + t the height z = h.x/|G| of a plane goes to s z + h.t/|G|.
    """
    h = np.asarray(face.hkl, dtype=float)
    gnorm = np.linalg.norm(h @ crystal.reciprocal)
    d = face.d
    hR = np.einsum("i,nij->nj", h, crystal.rotations)
    parent = list(range(len(heights)))

    def find(k):
        while parent[k] != k:
            k = parent[k]
        return k

    for s in signs:
        keep = np.all(hR == s * h, axis=1)
        for t in crystal.translations[keep]:
            offset = (h @ t) / gnorm
            for i, zi in enumerate(heights):
                for j, zj in enumerate(heights):
                    if _periodic_close(s * zi + offset, zj, d, tol):
                        ri, rj = find(i), find(j)
                        parent[max(ri, rj)] = min(ri, rj)
    return len({find(k) for k in range(len(heights))})


@pytest.mark.parametrize("spec, a, hkl", CASES, ids=IDS)
def test_cut_positions_are_the_slab_generator_shifts(spec, a, hkl):
    crystal, gen, slabs = _generate(spec, a, hkl)
    ft = face_terminations(crystal, hkl, layer_tol_angstrom=FTOL_ANGSTROM)
    d = ft.d
    shifts, c_height = _shift_heights(gen, slabs, ft.face.normal, d)
    periods = abs(c_height) / d
    # pymatgen SlabGenerator: the OUC holds a whole number of periods d ...
    assert periods == pytest.approx(round(periods), abs=1e-6)
    # ... and one shift per gap between planes in each of them
    assert len(slabs) == round(periods) * len(ft.cuts)
    ours = sorted(c.height for c in ft.cuts)
    for z in shifts:
        assert any(_periodic_close(z, c, d, MATCH_TOL_ANGSTROM) for c in ours), (z, ours)
    for c in ours:
        assert any(_periodic_close(z, c, d, MATCH_TOL_ANGSTROM) for z in shifts), (c, shifts)


@pytest.mark.parametrize("spec, a, hkl", CASES, ids=IDS)
def test_slab_layer_sequence_is_a_window_of_the_periodic_layers(spec, a, hkl):
    crystal, _gen, slabs = _generate(spec, a, hkl)
    ft = face_terminations(crystal, hkl, layer_tol_angstrom=FTOL_ANGSTROM)
    d = ft.d
    up = sorted(ft.layers, key=lambda layer: layer.height)
    nl = len(up)
    for slab in slabs:
        # pymatgen Slab.surface_area: the slab is one surface primitive cell wide
        assert slab.surface_area == pytest.approx(ft.face.mesh.area, rel=1e-9)
        z, comps = _slab_layers(slab, ft.face.normal, FTOL_ANGSTROM)
        periods = len(z) // nl + 2
        unrolled = [(layer.height + m * d, Counter(layer.composition)) for m in range(periods) for layer in up]

        def fits(start):
            z0 = unrolled[start][0]
            return all(
                abs((z[j] - z[0]) - (unrolled[start + j][0] - z0)) <= MATCH_TOL_ANGSTROM
                and comps[j] == unrolled[start + j][1]
                for j in range(len(z))
            )

        # pymatgen Slab: spacings and compositions of its layers, bottom to top along our normal
        assert any(fits(k) for k in range(nl)), (np.diff(z).round(4).tolist(), [dict(c) for c in comps])


@pytest.mark.parametrize("spec, a, hkl", CASES, ids=IDS)
def test_distinct_slabs_are_cut_orbits_under_normal_keeping_and_reversing_operations(spec, a, hkl):
    crystal, _gen, distinct = _generate(spec, a, hkl, filtered=True)
    ft = face_terminations(crystal, hkl, layer_tol_angstrom=FTOL_ANGSTROM)
    heights = [c.height for c in ft.cuts]
    # pymatgen get_slabs(filter_out_sym_slabs=True): one slab per orbit of cuts under h R = +-h
    assert len(distinct) == _orbits(crystal, ft.face, heights, (1, -1), MATCH_TOL_ANGSTROM)
    # single faces: only h R = +h relates terminations (every cut of these faces is allowed)
    assert all(c.allowed for c in ft.cuts)
    inequivalent = [t for t in ft.terminations if t.equivalent_to is None]
    assert len(inequivalent) == _orbits(crystal, ft.face, heights, (1,), MATCH_TOL_ANGSTROM)


def test_rock_salt_111_two_terminations_one_pymatgen_slab():
    # The worked example of the module docstring: pymatgen SlabGenerator, NaCl (111)
    crystal, _gen, distinct = _generate("rocksalt:Na,Cl", 5.64, (1, 1, 1), filtered=True)
    ft = face_terminations(crystal, (1, 1, 1))
    assert sorted(t.label for t in ft.terminations) == ["Cl", "Na"]
    assert len(distinct) == 1
    _z, comps = _slab_layers(distinct[0], ft.face.normal, FTOL_ANGSTROM)
    assert {tuple(comps[0]), tuple(comps[-1])} == {("Na",), ("Cl",)}  # one surface of each


def test_hexaboride_001_bond_filter_keeps_the_allowed_cuts():
    spec, a, hkl = "hexaboride:La,B", 4.157, (0, 0, 1)  # LaB6, a from memory
    # B-B bonds in LaB6: 1.66 Å between octahedra, 1.76 Å inside (from the structure, x = 0.2);
    # 1.9 Å takes both and no longer B-B distance (common practice: just above the bond lengths).
    bonds = ((("B", "B"), 1.9),)
    kept = ()
    for m in range(0, 17):
        crystal, gen, kept = _generate(spec, a, hkl, bonds=bonds, max_broken_bonds=m)
        if kept:
            break
    ft = face_terminations(crystal, hkl, layer_tol_angstrom=FTOL_ANGSTROM)
    d = ft.d
    shifts, _ = _shift_heights(gen, kept, ft.face.normal, d)
    allowed = [c.height for c in ft.cuts if c.allowed]
    forbidden = [c.height for c in ft.cuts if not c.allowed]
    assert len(forbidden) == 2 and len(allowed) == 2  # the two cuts through the B6 octahedra are not cuts
    # pymatgen get_slabs(bonds=..., max_broken_bonds=m): the cheapest shifts are our allowed cuts
    assert sorted({round(z, 6) for z in shifts}) == pytest.approx(sorted(allowed), abs=MATCH_TOL_ANGSTROM)
    assert sorted(t.label for t in ft.terminations) == ["B6", "La"]
