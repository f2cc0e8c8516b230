"""Which reconstruction cells ``match`` builds: the bound of what a cell can add, and the ranking it keeps.

MgAl2O4 spinel, Fd-3m (origin choice 2), a = 8.08 Å, Mg 8a, Al 16d, O 32e
with x = 0.262  # from memory (room-temperature values, cf. R. W. G. Wyckoff, Crystal Structures)
"""

import math

import numpy as np
import pytest

from termination.identification.candidates import candidate_table
from termination.identification.lattices import periodicities
from termination.identification.likelihood import (
    _lattice_term,
    cells_in_contention,
    effective_measurement,
    lattice_log_likelihood_max,
    match,
    measurement_visibility,
)
from termination.identification.measurement import Measurement, Value
from termination.identification.model import MatchModel
from termination.surface.corrugation import ApparentLattice

#: A (111) terrace seen from a (100) mount (54.7°), 4.67 Å steps (d111 = a/sqrt(3)) and a doubled
#: hexagonal mesh (2 x 5.71 Å): reconstruction cells lead.  # common practice (spinel geometry)
DOUBLED = Measurement(
    mount=(1, 0, 0),
    tilt=Value(54.7, 2.0),
    spacings=(Value(11.42, 0.2), Value(11.42, 0.2)),
    row_angle=Value(120.0, 3.0),
    steps=(Value(4.67, 0.2),),
)


def _lattice(rng):
    a, b = rng.uniform(2.0, 30.0, size=2)
    if rng.random() < 0.2:  # stripes: no second period, no angle (the uniform densities apply)
        return ApparentLattice(a=float(a), b=math.inf, gamma=math.nan)
    return ApparentLattice(a=float(a), b=float(b), gamma=float(rng.uniform(30.0, 150.0)))


@pytest.mark.parametrize("seed", range(4))
def test_no_lattice_scores_above_the_lattice_bound(seed):
    # The bound behind the lazy cell search: the lattice term of any predicted lattice, near the
    # measured one or not, with one, two or three spacings, with and without a row angle.
    rng = np.random.default_rng(seed)
    model = MatchModel()
    for _ in range(60):
        n = int(rng.integers(1, 4))
        values = rng.uniform(2.0, 30.0, size=n)
        spacings = tuple(Value(float(v), float(rng.uniform(0.01, 40.0))) for v in values)
        angle = Value(float(rng.uniform(20, 160)), float(rng.uniform(0.5, 200.0))) if rng.random() < 0.7 else None
        eff = effective_measurement(Measurement(spacings=spacings, row_angle=angle), model)
        bound = lattice_log_likelihood_max(eff, model)
        for _ in range(5):
            near = ApparentLattice(a=float(values[0]), b=float(values[-1]), gamma=angle.value if angle else 90.0)
            lattices = (near, _lattice(rng)) if rng.random() < 0.5 else (_lattice(rng),)
            periods = tuple(p for la in lattices for p in periodicities(la.a, la.b, la.gamma))
            value, _, _ = _lattice_term(lattices, periods, eff, model)
            assert value is not None and value <= bound + 1e-12


def test_lattice_bound_is_reached_by_an_exact_match_without_model_uncertainty():
    # With model_rel -> 0 an exact lattice attains the bound: it is not loose by construction.
    model = MatchModel(model_rel=1e-12)
    m = Measurement(spacings=(Value(5.0, 0.1), Value(5.0, 0.1)), row_angle=Value(90.0, 2.0))
    eff = effective_measurement(m, model)
    value, _, _ = _lattice_term((ApparentLattice(5.0, 5.0, 90.0),), (5.0,) * 5, eff, model)
    # a square lattice reads two ways (a, b) and (b, a), each giving the peak; angle 90 = 180 - 90
    assert value == pytest.approx(lattice_log_likelihood_max(eff, model), abs=1e-9)


def test_lazy_cells_leave_terminations_out_and_keep_the_ranking(spinel):
    # Cells that fit the doubled mesh lead; terminations whose tilt and steps leave their cells
    # out of reach get none, and the ranking above 1e-9 of the best is unchanged.
    model = MatchModel()
    vis = measurement_visibility(DOUBLED)
    asked: list[tuple] = []
    select = cells_in_contention(DOUBLED, model)

    def counting(candidates, build):
        def wrapped(hkl, tid):
            asked.append((hkl, tid))
            return build(hkl, tid)

        select(candidates, wrapped)

    lazy = candidate_table(spinel, (1, 0, 0), 2, visibility=vis, model=model, select_cells=counting)
    full = candidate_table(spinel, (1, 0, 0), 2, visibility=vis, model=model)
    with_cells = {(c.hkl, c.termination.id) for c in full.candidates if c.cell is not None}
    lazy_cells = {(c.hkl, c.termination.id) for c in lazy.candidates if c.cell is not None}
    assert len(asked) == len(set(asked))  # each termination's cells are searched once
    assert lazy_cells < with_cells  # some terminations with cells were left out

    def key(report):
        p0 = report.candidates[0].probability
        return [
            (r.hkl, r.label, r.cell, round(r.probability, 9)) for r in report.candidates if r.probability > 1e-9 * p0
        ]

    got = match(spinel, DOUBLED, max_index=2)
    want = match(spinel, DOUBLED, max_index=2, select_cells=None)
    assert got.candidates[0].cell is not None
    assert key(got) == key(want)
    assert len(lazy.candidates) < len(full.candidates)


def test_flat_prior_keeps_the_ranking_with_lazy_cells(spinel):
    # With every candidate equally likely a priori the bound drops the prior terms.
    model = MatchModel(flat_prior=True)
    got = match(spinel, DOUBLED, max_index=1, model=model)
    want = match(spinel, DOUBLED, max_index=1, model=model, select_cells=None)
    p0 = got.candidates[0].probability
    assert [(r.hkl, r.label, r.cell, round(r.probability, 9)) for r in got.candidates if r.probability > 1e-9 * p0] == [
        (r.hkl, r.label, r.cell, round(r.probability, 9)) for r in want.candidates if r.probability > 1e-9 * p0
    ]
    assert math.isclose(sum(r.probability for r in want.candidates), 1.0)


def test_scores_remembered_across_the_cell_search_equal_fresh_ones(spinel):
    # match scores each prediction once (the cell search and the ranking share the scores, the priors
    # copied in); ranking the same table afresh gives the same rows to the last bit.
    from termination.identification.likelihood import score

    model = MatchModel()
    table = candidate_table(
        spinel,
        (1, 0, 0),
        2,
        visibility=measurement_visibility(DOUBLED),
        model=model,
        select_cells=cells_in_contention(DOUBLED, model),
    )
    fresh = score(table, DOUBLED)
    shared = match(spinel, DOUBLED, max_index=2)
    assert len(fresh.candidates) == len(shared.candidates) > 20
    for a, b in zip(fresh.candidates, shared.candidates):
        assert (a.hkl, a.label, a.cell, a.probability, a.log_likelihood, a.terms) == (
            b.hkl,
            b.label,
            b.cell,
            b.probability,
            b.log_likelihood,
            b.terms,
        )
