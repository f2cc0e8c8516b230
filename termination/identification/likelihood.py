"""The likelihood of a measurement under each candidate, the posterior ranking, the fit check: the main job.

Candidates are built by :mod:`termination.identification.candidates`; each
is scored by log prior + the log likelihoods below, and probabilities are
normalised over all candidates.  Lengths in Å, angles in degrees; N is the
normal density and t the Student-t density with ``tail_dof`` degrees of
freedom (:class:`~termination.identification.model.MatchModel` holds every
number).

tilt
    L = (1/V) sum_v N(theta; phi_v, s), over the V variants v of the face
    whose normals lie within 90° of the mount normal; s^2 = s_measured^2 +
    s_mount^2, where the mount term (default 1.5°) allows for how the sample
    sits on its holder.
lattice
    Two or more spacings and a row angle are matched as one lattice
    (:mod:`termination.identification.lattices`): the first two spacings and
    the angle against every reading of the candidate's apparent lattice,
    each factor a Student-t.  A spacing given alone (and any third one) is a
    mixture over five predicted periods; a row angle alone is compared with
    gamma and 180° - gamma.  Predicted lengths carry a relative model
    uncertainty (default 2 %): s^2 = s_measured^2 + (model_rel p)^2.
steps
    Each measured height h is an independent draw from
    p(h) = (1 - eps) sum_c w_c N(h; H_c, s_c) + eps / h_max over the allowed
    steps c between terraces of the candidate's terminations (H_c =
    delta + n d), with weights w_c proportional to pi_lower pi_upper rho^n:
    the terminations weigh in by how much of the surface they cover.  A
    single termination (with its symmetry-equivalent copies) allows only
    the steps between its own terraces; a mixed surface of two terminations
    also the steps between them, its fractions pi marginalised over a
    uniform prior on a grid.  eps / h_max is the documented outlier
    allowance (default 5 % over 50 Å).
prior
    log pi(F) = -index_weight (|h|+|k|+|l| - 1) - bond_weight (w_F - w_min)/W,
    with w the weighted broken-bond density of the cheapest cut of a face,
    w_min the cheapest over all faces, and W = max(w_min, median(w)/2), so
    that a van der Waals gap (w = 0) is favoured without making other faces
    impossible.  Within a face, termination classes get
    |class| exp(-bond_weight (w_t - w_F)/W), normalised; a share
    (``mixed_share``, default 0.2) goes to mixed surfaces of the cheapest
    terminations; a polar termination gives half its mass to its
    reconstruction cells; cells the user names (``--cell``) get
    ``user_cell_share`` (default half) of a termination's mass, in equal
    parts, on every face whose mesh they fit.  A cell is matched with one
    domain and with all its rotational domains superposed (two lattices).
    ``flat_prior`` makes every candidate equally likely.

The posterior of a candidate is exp(log prior + sum log L), normalised.  It
is relative: :mod:`termination.identification.fit` checks separately that
the best candidate fits at all.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from typing import Any, ClassVar, TypedDict, Unpack

import numpy as np

from termination.arrays import FloatArray
from termination.bulk.crystal import Crystal
from termination.bulk.summary import StructureSummary
from termination.defaults import MAX_INDEX
from termination.errors import MeasurementError
from termination.identification.candidates import (
    Candidate,
    CandidateOptions,
    CandidateTable,
    CellBuilder,
    CellSelector,
    candidate_table,
    fraction_grid,
    logsumexp,
)
from termination.identification.fit import FitCheck, fit_check
from termination.identification.lattices import (
    ANGLE_RANGE_DEG,
    SPACING_RANGE_ANGSTROM,
    angle_log_likelihood,
    lattice_readings,
    log_student,
    pair_log_likelihood,
    spacing_log_likelihood,
)
from termination.identification.measurement import Measurement, Value
from termination.identification.model import MatchModel
from termination.identification.verdict import Verdict, verdict
from termination.surface.corrugation import ApparentLattice, Visibility
from termination.surface.miller import HKL
from termination.surface.terminations import TerminationRef
from termination.tabular import Tabular
from termination.units import ANGSTROM, DEG

__all__ = [
    "Criterion",
    "EffectiveMeasurement",
    "FaceProbability",
    "MatchReport",
    "MatchRow",
    "StepCriterion",
    "Terms",
    "effective_measurement",
    "match",
    "measurement_visibility",
    "score",
]

_SQRT_2PI = math.sqrt(2 * math.pi)


@dataclass(frozen=True)
class Criterion:
    """One measured value against a candidate's prediction.

    ``predicted`` is the nearest predicted value (None when the candidate
    predicts none, e.g. no visible lattice) and ``residual`` is
    (measured - predicted) / sigma, in units of sigma, with sigma the total
    uncertainty used.  The unit of ``measured``, ``sigma`` and ``predicted`` is
    given by the key that holds the criterion (``tilt_deg``, ``spacings_angstrom``).
    """

    measured: float
    sigma: float
    predicted: float | None
    residual: float | None


@dataclass(frozen=True)
class StepCriterion:
    """A measured step and the allowed step that explains it: which terraces, how many extra periods.

    ``lower`` and ``upper`` are the terminations below and above the step;
    ``multiple`` is n in delta + n d; ``outlier`` is True when no allowed step
    lies within 3 sigma (the step falls on the outlier allowance).
    """

    measured: float
    sigma: float
    predicted: float | None
    residual: float | None
    lower: TerminationRef | None
    upper: TerminationRef | None
    multiple: int | None
    outlier: bool


@dataclass(frozen=True)
class Terms:
    """Log-likelihood contribution of each criterion (None where nothing was measured), and the log prior."""

    log_prior: float
    tilt: float | None
    lattice: float | None
    steps: float | None


@dataclass(frozen=True)
class MatchRow:
    """One ranked candidate: its probability, the terms that make it, each measured value against its prediction.

    ``terraces`` are the terminations its terraces show (two for a mixed
    surface, with ``fractions`` their posterior mean shares);
    ``multiplicity`` is the number of symmetry-equivalent terminations the
    first one stands for and ``relation`` how they are related.
    """

    rank: int
    hkl: tuple[int, int, int]
    termination: TerminationRef
    terraces: tuple[TerminationRef, ...]
    fractions: tuple[float, ...]
    multiplicity: int
    relation: str | None
    cell: str | None
    probability: float
    log_likelihood: float
    terms: Terms
    tilt: Criterion | None = field(metadata=DEG)
    spacings: tuple[Criterion, ...] = field(metadata=ANGSTROM)
    row_angle: Criterion | None = field(metadata=DEG)
    steps: tuple[StepCriterion, ...] = field(metadata=ANGSTROM)
    apparent_lattice: ApparentLattice
    d: float = field(metadata=ANGSTROM)

    @property
    def label(self) -> str:
        return "+".join(t.label for t in self.terraces)


@dataclass(frozen=True)
class FaceProbability:
    """Posterior probability of a face, summed over its terminations, cells and terrace mixes."""

    hkl: tuple[int, int, int]
    probability: float


@dataclass(frozen=True)
class MatchReport(Tabular):
    """Result of ``termination match``: the measurement as scored, the ranked candidates, the fit and the verdict.

    ``measurement`` is the measurement with the uncertainties actually used
    (defaults applied, the mount term included in the tilt's sigma).
    """

    _tables: ClassVar[tuple[str, ...]] = ("candidates", "faces")

    structure: StructureSummary
    mount: tuple[int, int, int] | None
    measurement: Measurement
    candidates: tuple[MatchRow, ...]
    faces: tuple[FaceProbability, ...]
    fit: FitCheck
    verdict: str
    decided_by: str
    warning: str | None
    notes: tuple[str, ...]


# --------------------------------------------------------------------------- measurement


class EffectiveMeasurement(TypedDict):
    """Measured values with the uncertainties used (:func:`effective_measurement`).

    Attributes
    ----------
    tilt, row_angle : (value, sigma) or None
        Degrees.
    spacings, steps : (M, 2) FloatArray
        Rows (value, sigma), Å.
    """

    tilt: tuple[float, float] | None
    row_angle: tuple[float, float] | None
    spacings: FloatArray
    steps: FloatArray


def effective_measurement(measurement: Measurement, model: MatchModel) -> EffectiveMeasurement:
    """Measured values and the uncertainties used, with the documented defaults applied.

    Returns a dict with ``tilt`` and ``row_angle`` ((value, sigma) or None) and
    ``spacings`` and ``steps`` ((M, 2) arrays of value, sigma).  The tilt's
    sigma includes the mount term in quadrature.
    """
    m = measurement
    floor = 1e-3  # a zero uncertainty would make the densities singular

    def pair(v: Value | None, default_sigma: Callable[[float], float]) -> tuple[float, float] | None:
        if v is None:
            return None
        s = default_sigma(v.value) if v.sigma is None else v.sigma
        return (float(v.value), max(float(s), floor))

    def pairs(values: tuple[Value, ...], rel: float, minimum: float) -> FloatArray:
        return np.array([pair(v, lambda x: max(rel * abs(x), minimum)) for v in values], dtype=float).reshape(-1, 2)

    tilt = pair(m.tilt, lambda _: model.tilt_sigma_deg)
    if tilt is not None:
        tilt = (tilt[0], math.hypot(tilt[1], model.mount_sigma_deg))
    return {
        "tilt": tilt,
        "row_angle": pair(m.row_angle, lambda _: model.row_angle_sigma_deg),
        "spacings": pairs(m.spacings, model.spacing_rel, model.spacing_min_angstrom),
        "steps": pairs(m.steps, model.step_rel, model.step_min_angstrom),
    }


# --------------------------------------------------------------------------- one candidate


@dataclass
class _Scored:
    """Everything computed for one candidate (internal)."""

    loglik: float
    terms: Terms
    fractions: FloatArray
    lattice_class: int
    reading: tuple[float, float, float] | None
    swapped: bool
    lattice_z: list[float]


def _tilt_term(c: Candidate, eff: EffectiveMeasurement) -> float | None:
    if eff["tilt"] is None:
        return None
    theta, s = eff["tilt"]
    if not c.tilts:
        return -math.inf
    lp = -0.5 * ((theta - np.asarray(c.tilts)) / s) ** 2 - math.log(s * _SQRT_2PI)
    return float(logsumexp(lp) - math.log(len(c.tilts)))


def _lattice_term(
    lattices: tuple[ApparentLattice, ...], periods: tuple[float, ...], eff: EffectiveMeasurement, model: MatchModel
) -> tuple[float | None, tuple[float, float, float] | None, bool]:
    """(log L, best reading, swapped) of the spacings and row angle under one class's lattices."""
    spacings, alpha = eff["spacings"], eff["row_angle"]
    if not len(spacings) and alpha is None:
        return None, None, False
    readings = np.vstack([lattice_readings(la.a, la.b, la.gamma) for la in lattices])
    weights = np.full(len(readings), 1.0 / len(readings))
    p = np.asarray(periods, float)
    pw = np.full(len(p), 1.0 / len(p))
    total, swapped = 0.0, False
    best: tuple[float, float, float] | None = None
    rest = spacings
    if len(spacings) >= 2:
        value, k, swapped = pair_log_likelihood(
            readings,
            weights,
            tuple(spacings[0]),
            tuple(spacings[1]),
            alpha,
            model_rel=model.model_rel,
            dof=model.tail_dof,
        )
        total += value
        best = (float(readings[k, 0]), float(readings[k, 1]), float(readings[k, 2]))
        rest = spacings[2:]
    elif alpha is not None:
        total += angle_log_likelihood(alpha, readings[:, 2], weights, dof=model.tail_dof)
    for s in rest:
        total += spacing_log_likelihood(tuple(s), p, pw, model_rel=model.model_rel, dof=model.tail_dof)
    return total, best, swapped


def _step_density(c: Candidate, eff: EffectiveMeasurement, model: MatchModel) -> tuple[FloatArray, FloatArray]:
    """(C, M) normal densities of every measured step under every allowed step, and the sigmas used."""
    h = eff["steps"][:, 0]
    sig = eff["steps"][:, 1]
    H = np.asarray(c.step_heights, float)
    s = np.sqrt(sig[None, :] ** 2 + (model.model_rel * H[:, None]) ** 2)
    dens = np.exp(-0.5 * ((h[None, :] - H[:, None]) / s) ** 2) / (s * _SQRT_2PI)
    return dens, s


def _step_weights(c: Candidate, grid: FloatArray) -> FloatArray:
    """(G, C) normalised weights of the allowed steps at each grid point of class fractions."""
    lower = np.asarray(c.step_lower, int)
    upper = np.asarray(c.step_upper, int)
    w: FloatArray = grid[:, lower] * grid[:, upper] * np.asarray(c.step_factors, float)[None, :]
    total: FloatArray = w.sum(axis=1, keepdims=True)
    return w / total


def _score_one(c: Candidate, eff: EffectiveMeasurement, model: MatchModel) -> _Scored:
    tilt = _tilt_term(c, eff)
    k = len(c.classes)
    grid = fraction_grid(k)
    lat = [_lattice_term(c.lattices[i], c.periods[i], eff, model) for i in range(k)]
    has_lattice = lat[0][0] is not None
    with np.errstate(divide="ignore"):
        log_grid = np.log(grid)
    total_g = np.zeros(len(grid))
    lattice_g: FloatArray | None = None
    if has_lattice:
        lattice_g = logsumexp(log_grid + np.array([v[0] for v in lat])[None, :], axis=1)
        total_g = total_g + lattice_g
    steps_g: FloatArray | None = None
    if len(eff["steps"]):
        if c.step_heights:
            dens, _ = _step_density(c, eff, model)
            mix = _step_weights(c, grid) @ dens  # (G, M)
        else:
            mix = np.zeros((len(grid), len(eff["steps"])))
        eps = model.step_outlier_fraction
        with np.errstate(divide="ignore"):
            steps_g = np.log((1 - eps) * mix + eps / model.step_range_angstrom).sum(axis=1)
        total_g = total_g + steps_g
    post = total_g - logsumexp(total_g)
    weights = np.exp(post)
    fractions = weights @ grid
    mean_total = float(logsumexp(total_g) - math.log(len(grid)))

    def marginal(values: FloatArray | None) -> float | None:
        if values is None:
            return None
        return float(logsumexp(values) - math.log(len(grid)))

    loglik = (tilt if tilt is not None else 0.0) + mean_total
    terms = Terms(log_prior=c.log_prior, tilt=tilt, lattice=marginal(lattice_g), steps=marginal(steps_g))
    best_class = 0
    if has_lattice and k > 1:
        best_class = int(np.argmax(np.log(np.maximum(fractions, 1e-300)) + np.array([v[0] for v in lat])))
    return _Scored(loglik, terms, fractions, best_class, lat[best_class][1], lat[best_class][2], [])


class _Scorer:
    """:func:`_score_one` for one measurement and model, remembered per prediction.

    A candidate's score depends on its tilts, lattices, periods and steps
    only (and the log prior, which is copied in): the cell search scores the
    candidates of a table, and the ranking scores them again after their
    priors are renormalised.  The key is exactly those inputs, so a repeat
    gives the result the computation would.
    """

    def __init__(self, eff: EffectiveMeasurement, model: MatchModel) -> None:
        self.eff = eff
        self.model = model
        self.memo: dict[tuple[object, ...], _Scored] = {}

    def __call__(self, c: Candidate) -> _Scored:
        key = (
            c.tilts,
            len(c.classes),
            c.lattices,
            c.periods,
            c.step_heights,
            c.step_lower,
            c.step_upper,
            c.step_factors,
        )
        held = self.memo.get(key)
        if held is None:
            held = self.memo[key] = _score_one(c, self.eff, self.model)
        if held.terms.log_prior == c.log_prior:
            return held
        return replace(held, terms=replace(held.terms, log_prior=c.log_prior))


# --------------------------------------------------------------------------- rows


def _z(value: float, predicted: float, sigma: float) -> float:
    return (value - predicted) / sigma


def _criteria(
    c: Candidate, sc: _Scored, eff: EffectiveMeasurement, model: MatchModel
) -> tuple[Criterion | None, tuple[Criterion, ...], Criterion | None, tuple[StepCriterion, ...], ApparentLattice]:
    """Per-criterion predictions and residuals of a scored candidate (for the table, the JSON and the fit)."""
    tilt = None
    if eff["tilt"] is not None:
        v, s = eff["tilt"]
        if c.tilts:
            pred = min(c.tilts, key=lambda t: abs(v - t))
            tilt = Criterion(v, s, pred, _z(v, pred, s))
        else:
            tilt = Criterion(v, s, None, None)
    lattice = c.lattices[sc.lattice_class][0]
    spacings: list[Criterion] = []
    row_angle = None
    sp = eff["spacings"]

    def spacing_criterion(value: float, sigma: float, predicted: float | None) -> Criterion:
        if predicted is None or not math.isfinite(predicted):
            return Criterion(value, sigma, None, None)
        total = math.hypot(sigma, model.model_rel * predicted)
        return Criterion(value, total, predicted, _z(value, predicted, total))

    rest = sp
    angles = [lattice.gamma] if math.isfinite(lattice.gamma) else []
    if len(sp) >= 2 and sc.reading is not None:
        p1, p2, g = sc.reading
        if sc.swapped:
            p1, p2 = p2, p1
        spacings += [spacing_criterion(sp[0][0], sp[0][1], p1), spacing_criterion(sp[1][0], sp[1][1], p2)]
        angles = [g] if math.isfinite(g) else []
        rest = sp[2:]
    periods = [p for p in c.periods[sc.lattice_class] if math.isfinite(p)]
    for v, s in rest:
        nearest = min(periods, key=lambda p: abs(v - p) / math.hypot(s, model.model_rel * p)) if periods else None
        spacings.append(spacing_criterion(v, s, nearest))
    if eff["row_angle"] is not None:
        v, s = eff["row_angle"]
        if angles:
            g = angles[0]
            pred = g if abs(v - g) <= abs(v - (180 - g)) else 180 - g
            row_angle = Criterion(v, s, pred, _z(v, pred, s))
        else:
            row_angle = Criterion(v, s, None, None)
    steps: list[StepCriterion] = []
    if len(eff["steps"]):
        refs = {m: ref for ref, members in zip(c.classes, c.members) for m in members}
        if c.step_heights:
            dens, sig = _step_density(c, eff, model)
            w = _step_weights(c, sc.fractions[None, :])[0]
            resp = w[:, None] * dens  # (C, M)
            H = np.asarray(c.step_heights)
        for m, (v, s) in enumerate(eff["steps"]):
            if not c.step_heights:
                steps.append(StepCriterion(v, s, None, None, None, None, None, True))
                continue
            zs = (v - H) / sig[:, m]
            j = int(np.argmax(resp[:, m])) if resp[:, m].max() > 0 else int(np.argmin(np.abs(zs)))
            if abs(zs[j]) > 3:
                j = int(np.argmin(np.abs(zs)))
            outlier = bool(abs(zs[j]) > 3)
            steps.append(
                StepCriterion(
                    measured=float(v),
                    sigma=float(sig[j, m]),
                    predicted=float(H[j]),
                    residual=float(zs[j]),
                    lower=refs.get(c.step_lower_id[j]),
                    upper=refs.get(c.step_upper_id[j]),
                    multiple=int(c.step_multiples[j]),
                    outlier=outlier,
                )
            )
    return tilt, tuple(spacings), row_angle, tuple(steps), lattice


def _row(rank: int, c: Candidate, sc: _Scored, p: float, eff: EffectiveMeasurement, model: MatchModel) -> MatchRow:
    tilt, spacings, row_angle, steps, lattice = _criteria(c, sc, eff, model)
    return MatchRow(
        rank=rank,
        hkl=c.hkl,
        termination=c.termination,
        terraces=c.classes,
        fractions=tuple(float(f) for f in sc.fractions),
        multiplicity=c.multiplicity,
        relation=c.relation,
        cell=c.cell,
        probability=float(p),
        log_likelihood=float(sc.loglik),
        terms=sc.terms,
        tilt=tilt,
        spacings=spacings,
        row_angle=row_angle,
        steps=steps,
        apparent_lattice=lattice,
        d=c.d,
    )


def _fit(row: MatchRow, model: MatchModel) -> FitCheck:
    residuals: list[tuple[str, float]] = []
    if row.tilt is not None:
        residuals.append(("tilt", row.tilt.residual if row.tilt.residual is not None else math.inf))
    for s in row.spacings:
        residuals.append(("lattice", s.residual if s.residual is not None else math.inf))
    if row.row_angle is not None:
        residuals.append(("lattice", row.row_angle.residual if row.row_angle.residual is not None else math.inf))
    return fit_check(
        residuals,
        [s.residual for s in row.steps],
        outlier_fraction=model.step_outlier_fraction,
        alpha=model.fit_alpha,
        outlier_alpha=model.fit_outlier_alpha,
        steps_beyond_range=[s.measured for s in row.steps if s.outlier and s.measured > model.step_range_angstrom],
        step_range_angstrom=model.step_range_angstrom,
    )


# --------------------------------------------------------------------------- ranking


def score(table: CandidateTable, measurement: Measurement, top: int | None = None) -> MatchReport:
    """Posterior probabilities of the candidates of ``table`` given ``measurement``.

    Returns
    -------
    MatchReport
        Candidates ranked by probability (``top`` of them), each with its
        per-criterion predictions, residuals and log-likelihood terms; the fit
        check of the best; the verdict and what decided it.
    """
    return _score(table, measurement, top, None)


def _score(table: CandidateTable, measurement: Measurement, top: int | None, scorer: _Scorer | None) -> MatchReport:
    """:func:`score`, reusing the scores ``scorer`` (made for ``measurement``) already holds."""
    if not isinstance(measurement, Measurement):
        raise MeasurementError("measurement must be a Measurement")
    if top is not None and (int(top) != top or top < 1):
        raise MeasurementError(f"--top must be a positive integer, got {top}")
    model = table.model
    eff = effective_measurement(measurement, model)
    if eff["tilt"] is None and not len(eff["spacings"]) and eff["row_angle"] is None and not len(eff["steps"]):
        raise MeasurementError("nothing to match: give a tilt, spacings, a row angle or step heights")
    if eff["tilt"] is not None and table.mount is None:
        raise MeasurementError("a tilt needs the mount face: give --mount H K L")
    cands = table.candidates
    if scorer is None or scorer.model != model:
        scorer = _Scorer(eff, model)
    scored = [scorer(c) for c in cands]
    loglik = np.array([s.loglik for s in scored])
    post = loglik + np.array([c.log_prior for c in cands])
    if not np.any(np.isfinite(post)):
        raise MeasurementError("no candidate is compatible with the measurement (check the mount and tilt)")
    prob = np.exp(post - logsumexp(post))
    order = np.lexsort((np.arange(len(prob)), -np.round(prob, 12)))
    rows_all = [_row(rank + 1, cands[i], scored[i], prob[i], eff, model) for rank, i in enumerate(order)]
    faces = _face_marginals(cands, prob)
    fit = _fit(rows_all[0], model)
    decision: Verdict = verdict(
        rows_all,
        [cands[i] for i in order],
        faces,
        fit,
        len(cands),
        default_visibility=table.visibility == Visibility(),
        hexagonal=table.structure.hexagonal_axes,
    )
    shown = rows_all if top is None else rows_all[: int(top)]
    notes = table.notes + (
        "An identification is a ranked hypothesis from a model, not proof: confirm it with an independent probe.",
    )
    return MatchReport(
        structure=table.structure,
        mount=table.mount,
        measurement=_echo(eff, table.mount, table.max_index),
        candidates=tuple(shown),
        faces=faces,
        fit=fit,
        verdict=decision.text,
        decided_by=decision.decided_by,
        warning=decision.warning,
        notes=notes,
    )


def _echo(eff: EffectiveMeasurement, mount: HKL | None, max_index: int) -> Measurement:
    """The measurement as scored: values with the uncertainties actually used."""

    def values(a: FloatArray) -> tuple[Value, ...]:
        return tuple(Value(float(v), float(sg)) for v, sg in a)

    return Measurement(
        mount=mount,
        max_index=max_index,
        tilt=None if eff["tilt"] is None else Value(*eff["tilt"]),
        row_angle=None if eff["row_angle"] is None else Value(*eff["row_angle"]),
        spacings=values(eff["spacings"]),
        steps=values(eff["steps"]),
    )


def _face_marginals(candidates: Sequence[Candidate], prob: FloatArray) -> tuple[FaceProbability, ...]:
    """Faces ranked by their summed probability."""
    total: dict[tuple[int, int, int], float] = {}
    for c, p in zip(candidates, prob):
        total[c.hkl] = total.get(c.hkl, 0.0) + float(p)
    ranked = sorted(total.items(), key=lambda kv: (-round(kv[1], 12), kv[0]))
    return tuple(FaceProbability(hkl=h, probability=p) for h, p in ranked)


def match(
    crystal: Crystal, measurement: Measurement, *, top: int | None = None, **options: Unpack[CandidateOptions]
) -> MatchReport:
    """Rank the faces and terminations of ``crystal`` against ``measurement``.

    ``options`` go to :func:`termination.identification.candidates.candidate_table`;
    ``measurement.mount``, ``max_index`` and the visibility fields are used
    when the options do not set them.
    """
    opts = CandidateOptions(**options)
    opts.setdefault("mount", measurement.mount)
    opts.setdefault("max_index", measurement.max_index or MAX_INDEX)
    if "visibility" not in opts:
        opts["visibility"] = measurement_visibility(measurement)
    if measurement.cells and not opts.get("cells"):
        opts["cells"] = measurement.cells
    model = opts.get("model") or MatchModel()
    scorer = _Scorer(effective_measurement(measurement, model), model)
    opts.setdefault("select_cells", _cells_in_contention(measurement, model, scorer))
    table = candidate_table(crystal, **opts)
    return _score(table, measurement, top, scorer)


#: A termination whose best conceivable reconstruction cell would still trail the best candidate by
#: more than this (natural log units, a factor of e^25 ~ 10^11) gets no cells built.
CONTENTION_MARGIN = 25.0


def lattice_log_likelihood_max(eff: EffectiveMeasurement, model: MatchModel) -> float:
    """The largest lattice term any predicted lattice can give the measured spacings and row angle.

    Each spacing and the row angle contributes at most the larger of the
    Student-t density at zero residual for its measured sigma (a predicted
    length only widens it: s^2 = s_measured^2 + (model_rel p)^2) and the
    uniform density of a value no lattice explains; a mixture over lattice
    readings or periods is at most its largest component.
    """
    dof = model.tail_dof
    spacing_floor = -math.log(SPACING_RANGE_ANGSTROM)
    angle_floor = -math.log(ANGLE_RANGE_DEG)
    total = sum(max(float(log_student(0.0, 0.0, s, dof)), spacing_floor) for _, s in eff["spacings"])
    if eff["row_angle"] is not None:
        total += max(float(log_student(0.0, 0.0, eff["row_angle"][1], dof)), angle_floor)
    return float(total)


def cells_in_contention(measurement: Measurement, model: MatchModel) -> CellSelector:
    """A ``select_cells`` function for :func:`candidate_table`: builds the cells of terminations in contention.

    A cell shares its termination's tilt and steps; only its lattice and its
    prior differ.  No lattice scores better than
    :func:`lattice_log_likelihood_max`, and a cell's prior is at most its
    termination's share of cells, so every cell of termination t scores at
    most

        B(t) = log pi(t) - log(1 - r) + log r + L_tilt(t) + L_steps(t) + L_lattice,max

    with pi(t) the prior its 1×1 candidate keeps and r the
    ``reconstructed_share`` (with ``flat_prior``: L_tilt + L_steps +
    L_lattice,max).  Terminations are taken in the order of B, highest
    first; each one's cells are built, and scored when B is above the best
    score so far (1×1 candidates, mixed surfaces and the cells scored), which
    rises with them.
    The search stops at the first termination whose B trails that best by
    more than :data:`CONTENTION_MARGIN`: no later cell could come nearer.
    The ranking is the same as with every cell built, up to candidates
    e^-25 times less probable than the best.
    """
    return _cells_in_contention(measurement, model, None)


def _cells_in_contention(measurement: Measurement, model: MatchModel, scorer: _Scorer | None) -> CellSelector:
    """:func:`cells_in_contention`, scoring through ``scorer`` (made for ``measurement`` and ``model``)."""
    eff = effective_measurement(measurement, model)
    score_one = scorer if scorer is not None else _Scorer(eff, model)
    lattice_max = lattice_log_likelihood_max(eff, model)
    r = model.reconstructed_share
    cell_share = 0.0 if model.flat_prior else math.log(r) - math.log1p(-r)

    def prior(c: Candidate) -> float:
        return 0.0 if model.flat_prior else c.log_prior

    def select(candidates: tuple[Candidate, ...], build: CellBuilder) -> None:
        if not candidates:
            return
        scored = [score_one(c) for c in candidates]
        best = max(prior(c) + sc.loglik for c, sc in zip(candidates, scored))
        bounds = [
            (prior(c) + cell_share + (sc.terms.tilt or 0.0) + (sc.terms.steps or 0.0) + lattice_max, i)
            for i, (c, sc) in enumerate(zip(candidates, scored))
            if c.cell is None and not c.mixed
        ]
        for bound, i in sorted(bounds, key=lambda b: (-b[0], b[1])):
            if bound < best - CONTENTION_MARGIN:
                break
            c = candidates[i]
            cells = build(c.hkl, c.termination.id)
            if bound > best:  # only then can one of these cells raise the best: score them
                for cell in cells:
                    best = max(best, prior(cell) + score_one(cell).loglik)

    return select


def measurement_visibility(measurement: Measurement) -> Visibility:
    """The corrugation model a measurement file asks for (visible species, weights, decay length)."""
    kw: dict[str, Any] = {}
    if measurement.visible:
        kw["visible"] = measurement.visible
    if measurement.weights:
        kw["weights"] = measurement.weights
    if measurement.decay_length is not None:
        kw["decay_length_angstrom"] = measurement.decay_length
    if measurement.depth is not None:
        kw["max_depth_angstrom"] = measurement.depth
    if measurement.site_weights:
        kw["site_weights"] = tuple(measurement.site_weights.items())
    return Visibility(**kw)
