"""Ewald sums: charges in one plane, at several heights with 2D periodicity, and in a 3D crystal."""

import numpy as np
import pytest

from termination.surface.electrostatics import ewald_bulk_potential, ewald_pair_matrix, ewald_slab_matrix

MADELUNG_NACL = 1.747565  # rock salt, per ion in units of e/r0 (C. Kittel, Introduction to Solid State Physics)
A = 5.64  # NaCl, Å (from memory)
FCC = np.array([[0, 0, 0], [0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]])


def test_bulk_sum_gives_the_rock_salt_madelung_constant():
    positions = np.vstack([FCC, FCC + [0.5, 0, 0]]) * A
    charges = np.array([1.0] * 4 + [-1.0] * 4)
    for alpha in (None, 0.5, 1.1):  # independent of the splitting parameter
        v = ewald_bulk_potential(np.eye(3) * A, positions, charges, positions[[0, 4]], alpha)
        assert v * A / 2 == pytest.approx([-MADELUNG_NACL, MADELUNG_NACL], abs=2e-6)


def test_a_target_on_a_periodic_image_is_that_ion():
    # The same ion seen one lattice vector away: its own term must still be left out.
    positions = np.vstack([FCC, FCC + [0.5, 0, 0]]) * A
    charges = np.array([1.0] * 4 + [-1.0] * 4)
    v = ewald_bulk_potential(np.eye(3) * A, positions, charges, positions[[0]] + [A, -A, 2 * A])
    assert v[0] * A / 2 == pytest.approx(-MADELUNG_NACL, abs=2e-6)


def test_slab_sum_at_the_centre_of_a_thick_001_slab_is_the_bulk():
    # Rock salt (001) layers are neutral: the middle of a thick slab is bulk (Kittel's constant).
    mesh = np.eye(2) * A / np.sqrt(2)
    pos, q = [], []
    for layer in range(21):
        s = 1 if layer % 2 == 0 else -1
        pos += [[0.0, 0.0, layer * A / 2], [mesh[0, 0] / 2, mesh[1, 1] / 2, layer * A / 2]]
        q += [s, -s]
    pos, q = np.array(pos), np.array(q, float)
    for alpha in (None, 0.4, 0.9):
        v = ewald_slab_matrix(mesh, pos[20:21], pos, alpha) @ q
        assert v[0] * A / 2 == pytest.approx(-MADELUNG_NACL, abs=1e-6)


def test_slab_sum_agrees_with_a_direct_sum_for_a_linear_quadrupole():
    # +1, -2, +1 stacked along the normal: no charge and no dipole per cell, so the direct lattice
    # sum converges; its 1/R tail is removed by Richardson extrapolation (common practice).
    cell = np.array([[3.0, 0.0], [1.0, 2.5]])
    h = 1.3
    src = np.array([[0, 0, 0], [0, 0, h], [0, 0, 2 * h]], float)
    q = np.array([1.0, -2.0, 1.0])
    target = np.array([[0.7, 0.4, 0.5]])

    def direct(n):
        i, j = np.meshgrid(np.arange(-n, n + 1), np.arange(-n, n + 1), indexing="ij")
        lat = np.stack([i.ravel(), j.ravel()], axis=1) @ cell
        lat = lat[np.linalg.norm(lat, axis=1) <= 2.4 * n]
        total = 0.0
        for s, qs in zip(src, q):
            d = target[0, :2] - s[:2] - lat
            total += qs * np.sum(1 / np.sqrt(np.sum(d * d, axis=1) + (target[0, 2] - s[2]) ** 2))
        return total

    reference = 2 * direct(400) - direct(200)
    for alpha in (None, 0.5, 1.0):
        assert (ewald_slab_matrix(cell, target, src, alpha) @ q)[0] == pytest.approx(reference, abs=2e-6)


def test_slab_sum_in_one_plane_is_the_planar_sum():
    mesh = 3.0 * np.array([[1.0, 0.0], [-0.5, np.sqrt(3) / 2]])
    xy = np.array([[0.0, 0.0], [1.1, 0.4], [0.3, 1.9]])
    xyz = np.column_stack([xy, np.zeros(3)])
    assert np.allclose(ewald_slab_matrix(mesh, xyz, xyz), ewald_pair_matrix(mesh, xy), atol=1e-12)


def test_far_sheets_feel_only_the_uniform_field():
    # Two opposite unit-charge lattices h apart: beyond a few cell lengths only the G = 0 term
    # -(2π/A)|z| of a charged sheet is left (Jackson, Classical Electrodynamics, ch. 1).
    mesh = np.eye(2) * 3.0
    for h in (12.0, 20.0):
        phi = ewald_slab_matrix(mesh, [[0.4, 0.2, 0.0]], [[0.0, 0.0, h]])
        near = ewald_slab_matrix(mesh, [[0.4, 0.2, 0.0]], [[0.0, 0.0, h - 1.0]])
        assert float(phi[0, 0] - near[0, 0]) == pytest.approx(-2 * np.pi / 9.0, rel=1e-9)


def test_bulk_sum_is_the_madelung_constant_in_a_long_thin_cell_of_the_same_lattice():
    # Rock salt described by a primitive cell sheared far from its short basis (a unimodular change
    # of basis, as a high-index face's cell is): the potential must not depend on the description.
    prim = np.array([[0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]]) * A
    sheared = np.array([[1, 0, 0], [3, 1, 0], [-2, 5, 1]]) @ prim
    positions = np.array([[0.0, 0.0, 0.0], [A / 2, 0.0, 0.0]])
    v = ewald_bulk_potential(sheared, positions, [1.0, -1.0], positions)
    assert v * A / 2 == pytest.approx([-MADELUNG_NACL, MADELUNG_NACL], abs=2e-6)  # Kittel, as above
