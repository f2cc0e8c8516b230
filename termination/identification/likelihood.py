"""The likelihood of a measurement under each candidate, the posterior ranking and the verdict: the main job.

A candidate is a face (hkl) with one of its terminations, and, where a
measured spacing asks for a supercell, one of the reconstruction cells that
could compensate a polar termination.  Each candidate predicts

- its tilt to the mount face, for each symmetry variant of the face;
- the periodicities and row angle of the corrugation it shows (the apparent
  lattice of :mod:`termination.surface.corrugation`);
- the step heights between its terraces and those of the other terminations
  of the face (:mod:`termination.surface.terminations`).

The log posterior of a candidate is log prior + the log likelihoods below;
probabilities are normalised over all candidates (softmax).

Likelihood model (Å, degrees; N(x; mu, s) is the normal density):

tilt
    L = (1/V) sum_v N(theta; phi_v, s_theta), over the V variants v of the
    face whose normal lies within 90° of the mount normal (the exposed
    variant is unknown; each is equally likely).
spacings
    Each measured spacing s_k is one of the K = 5 predicted periodicities p
    (the three shortest lattice-vector lengths of the apparent lattice and
    its two shortest row spacings), each equally likely, or an outlier:
    L_k = (1 - eps) (1/K) sum_p N(s_k; p, sigma_k) + eps / s_max.
row angle
    L = (1 - eps) N(alpha; gamma', s_alpha) + eps / 180° with gamma'
    whichever of gamma and 180° - gamma is closer (rows can be read at
    either angle).  A termination on which none of the visible species lies
    predicts no lattice and scores the floors only.
steps
    Each measured height h is an independent draw from the mixture
    p(h) = (1 - eps) sum_c pi_c N(h; H_c, sigma_h) + eps / h_max over the
    allowed heights H_c = delta_tj + n d from the candidate's termination t
    to every termination j of the face (up or down), weights
    pi_c ~ rho^n (single steps most common), plus an outlier floor
    eps / h_max.  A height that matches no allowed step falls on the floor and
    counts against the candidate.
uncertainties
    sigma^2 = sigma_measured^2 + (model_rel * predicted)^2: the model adds a
    relative uncertainty (relaxation, tip convolution) to predicted lengths.
prior
    log pi(F) = -index_weight (|h|+|k|+|l| - 1) - bond_weight (w_F/w_min - 1),
    log pi(t|F) = -bond_weight (w_t/w_F - 1), normalised within the face,
    with w the weighted broken-bond density of a termination, w_F the
    cheapest termination of face F and w_min the cheapest of all faces.  A
    polar (Tasker III) termination keeps half its mass as 1x1 and gives the
    other half, in equal parts, to its best (up to four) reconstruction cells
    from :mod:`termination.surface.polarity`.  ``flat_prior`` makes every candidate
    equally likely a priori.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from termination.bulk.summary import StructureSummary
from termination.defaults import MAX_INDEX
from termination.errors import MeasurementError
from termination.identification.candidates import candidate_table, logsumexp
from termination.identification.measurement import Measurement, Value
from termination.surface.corrugation import ApparentLattice, Visibility
from termination.surface.miller import hkl_text as _hkl
from termination.surface.terminations import TerminationRef
from termination.units import ANGSTROM, DEG

__all__ = [
    "Criterion",
    "FaceProbability",
    "MatchReport",
    "MatchRow",
    "effective_measurement",
    "match",
    "measurement_visibility",
    "score",
]


@dataclass(frozen=True)
class Criterion:
    """One measured value against a candidate's prediction.

    ``predicted`` is the nearest predicted value (None when the candidate
    predicts none, e.g. no visible lattice) and ``residual`` is
    (measured - predicted) / sigma, in units of sigma.  The unit of
    ``measured``, ``sigma`` and ``predicted`` is given by the key that holds
    the criterion (``tilt_deg``, ``spacings_angstrom``).
    """

    measured: float
    sigma: float
    predicted: float | None
    residual: float | None


@dataclass(frozen=True)
class MatchRow:
    """One ranked candidate with its probability and each measured value against its prediction."""

    rank: int
    hkl: tuple[int, int, int]
    termination: TerminationRef
    cell: str | None
    probability: float
    log_likelihood: float
    log_prior: float
    tilt: Criterion | None = field(metadata=DEG)
    spacings: tuple[Criterion, ...] = field(metadata=ANGSTROM)
    row_angle: Criterion | None = field(metadata=DEG)
    steps: tuple[Criterion, ...] = field(metadata=ANGSTROM)
    apparent_lattice: ApparentLattice
    d: float = field(metadata=ANGSTROM)


@dataclass(frozen=True)
class FaceProbability:
    """Posterior probability of a face, summed over its terminations and cells."""

    hkl: tuple[int, int, int]
    probability: float


@dataclass(frozen=True)
class MatchReport:
    """Result of ``termination match``: the measurement as scored, the ranked candidates and the verdict.

    ``measurement`` is the measurement with the default uncertainties applied.
    """

    structure: StructureSummary
    mount: tuple[int, int, int] | None
    measurement: Measurement
    candidates: tuple[MatchRow, ...]
    faces: tuple[FaceProbability, ...]
    verdict: str
    warning: str | None
    notes: tuple[str, ...]


def _log_normal(x, mu, s):
    with np.errstate(invalid="ignore"):
        return -0.5 * ((x - mu) / s) ** 2 - np.log(s * np.sqrt(2 * np.pi))


def effective_measurement(measurement, model):
    """Measured values and their uncertainties with the documented defaults applied.

    Returns a dict with ``tilt``, ``row_angle`` ((value, sigma) or None),
    ``spacings`` and ``steps`` ((M, 2) arrays of value, sigma).
    """
    m = measurement
    floor = 1e-3  # a zero uncertainty would make the densities singular

    def pair(v, default_sigma):
        if v is None:
            return None
        s = default_sigma(v.value) if v.sigma is None else v.sigma
        return (float(v.value), max(float(s), floor))

    def pairs(values, rel, minimum):
        return np.array([pair(v, lambda x: max(rel * abs(x), minimum)) for v in values], dtype=float).reshape(-1, 2)

    return {
        "tilt": pair(m.tilt, lambda _: model.tilt_sigma_deg),
        "row_angle": pair(m.row_angle, lambda _: model.row_angle_sigma_deg),
        "spacings": pairs(m.spacings, model.spacing_rel, model.spacing_min_angstrom),
        "steps": pairs(m.steps, model.step_rel, model.step_min_angstrom),
    }


def _with_floor(log_density, eps, value_range):
    """log((1 - eps) p + eps / range): a density with a uniform outlier floor."""
    return np.logaddexp(np.log1p(-eps) + log_density, np.log(eps / value_range))


def _pad(seqs, fill=np.nan):
    n = max((len(s) for s in seqs), default=0)
    out = np.full((len(seqs), max(n, 1)), fill, dtype=float)
    for i, s in enumerate(seqs):
        out[i, : len(s)] = s
    return out


def _terms(table, eff):
    """Per-candidate log-likelihood terms (vectorised over candidates)."""
    model = table.model
    cands = table.candidates
    nc = len(cands)
    out = {}
    if eff["tilt"] is not None:
        if table.mount is None:
            raise MeasurementError("a tilt needs the mount face: give --mount H K L")
        theta, s = eff["tilt"]
        T = _pad([c.tilts for c in cands])
        lp = _log_normal(theta, T, s)
        lp = np.where(np.isnan(T), -np.inf, lp)
        n = np.sum(~np.isnan(T), axis=1)
        with np.errstate(divide="ignore"):
            out["tilt"] = np.where(n > 0, logsumexp(lp, axis=1) - np.log(np.maximum(n, 1)), -np.inf)
    if len(eff["spacings"]):
        P = np.array([c.periodicities for c in cands])  # (C, K)
        s_m, sig = eff["spacings"][:, 0], eff["spacings"][:, 1]
        s_tot = np.sqrt(sig[None, None, :] ** 2 + (model.model_rel * P[:, :, None]) ** 2)
        lp = _log_normal(s_m[None, None, :], P[:, :, None], s_tot)  # (C, K, M)
        lp = np.where(np.isnan(lp), -np.inf, lp)  # no visible lattice predicted
        mix = logsumexp(lp, axis=1) - np.log(P.shape[1])
        s_max = max(model.outlier_range_angstrom, 1.5 * float(s_m.max()))
        out["spacings"] = _with_floor(mix, model.outlier_fraction, s_max).sum(axis=1)
    if eff["row_angle"] is not None:
        alpha, s = eff["row_angle"]
        g = np.array([c.apparent[2] for c in cands], dtype=float)
        g[~np.isfinite(g)] = np.nan
        pred = np.where(np.abs(alpha - g) <= np.abs(alpha - (180 - g)), g, 180 - g)
        lp = np.where(np.isnan(pred), -np.inf, _log_normal(alpha, pred, s))
        out["row_angle"] = _with_floor(lp, model.outlier_fraction, 180.0)
    if len(eff["steps"]):
        H = _pad([c.step_heights for c in cands])
        W = _pad([c.step_weights for c in cands], fill=0.0)
        h, sig = eff["steps"][:, 0], eff["steps"][:, 1]
        s_tot = np.sqrt(sig[None, None, :] ** 2 + (model.model_rel * np.nan_to_num(H)[:, :, None]) ** 2)
        with np.errstate(divide="ignore", invalid="ignore"):
            lp = _log_normal(h[None, None, :], H[:, :, None], s_tot) + np.log(W)[:, :, None]
        lp = np.where(np.isnan(H)[:, :, None], -np.inf, lp)
        mix = logsumexp(lp, axis=1)  # (C, M)
        h_max = max(model.outlier_range_angstrom, 1.5 * float(h.max()))
        out["steps"] = _with_floor(mix, model.outlier_fraction, h_max).sum(axis=1)
    for k in out:
        out[k] = np.asarray(out[k], dtype=float).reshape(nc)
    return out


def score(table, measurement, top=None):
    """Posterior probabilities of the candidates of ``table`` given ``measurement``.

    Returns
    -------
    MatchReport
        Candidates ranked by probability (``top`` of them), with per-criterion
        predictions and residuals in units of sigma.
    """
    if not isinstance(measurement, Measurement):
        raise MeasurementError("measurement must be a Measurement")
    if top is not None and (int(top) != top or top < 1):
        raise MeasurementError(f"--top must be a positive integer, got {top}")
    eff = effective_measurement(measurement, table.model)
    if eff["tilt"] is None and not len(eff["spacings"]) and eff["row_angle"] is None and not len(eff["steps"]):
        raise MeasurementError("nothing to match: give a tilt, spacings, a row angle or step heights")
    terms = _terms(table, eff)
    loglik = sum(terms.values())
    prior = np.array([c.log_prior for c in table.candidates])
    post = loglik + prior
    if not np.any(np.isfinite(post)):
        raise MeasurementError("no candidate is compatible with the measurement (check the mount and tilt)")
    prob = np.exp(post - logsumexp(post))
    order = np.lexsort((np.arange(len(prob)), -np.round(prob, 12)))
    shown = order if top is None else order[: int(top)]
    rows = tuple(
        _row(rank + 1, table.candidates[i], prob[i], loglik[i], eff, table.model) for rank, i in enumerate(shown)
    )
    faces = _face_marginals(table.candidates, prob)
    second = (
        None
        if len(order) < 2
        else _row(2, table.candidates[order[1]], prob[order[1]], loglik[order[1]], eff, table.model)
    )
    verdict, warning = _verdict(rows[0], second, len(table.candidates), faces)
    notes = table.notes + (
        "An identification is a ranked hypothesis from a model, not proof: confirm it with an independent probe.",
    )
    return MatchReport(
        structure=table.structure,
        mount=table.mount,
        measurement=_echo(eff, table.mount, table.max_index),
        candidates=rows,
        faces=faces,
        verdict=verdict,
        warning=warning,
        notes=notes,
    )


def _echo(eff, mount, max_index):
    """The measurement as scored: values with the uncertainties actually used."""

    def values(a):
        return tuple(Value(float(v), float(sg)) for v, sg in a)

    return Measurement(
        mount=mount,
        max_index=max_index,
        tilt=None if eff["tilt"] is None else Value(*eff["tilt"]),
        row_angle=None if eff["row_angle"] is None else Value(*eff["row_angle"]),
        spacings=values(eff["spacings"]),
        steps=values(eff["steps"]),
    )


def _nearest(value, options, sigma_of):
    options = np.asarray(options, dtype=float)
    if options.size == 0:
        return None, None
    sig = np.array([sigma_of(p) for p in options])
    z = (value - options) / sig
    if not np.any(np.isfinite(z)):
        return None, None
    i = int(np.nanargmin(np.abs(z)))
    return float(options[i]), float(z[i])


def _row(rank, c, p, ll, eff, model):
    tilt = None
    if eff["tilt"] is not None:
        v, s = eff["tilt"]
        pred, res = _nearest(v, c.tilts, lambda _: s)
        tilt = Criterion(v, s, pred, res)
    spacings = tuple(
        Criterion(v, s, *_nearest(v, c.periodicities, lambda p, s=s: np.hypot(s, model.model_rel * p)))
        for v, s in eff["spacings"]
    )
    row_angle = None
    if eff["row_angle"] is not None:
        v, s = eff["row_angle"]
        g = c.apparent[2]
        pred = g if abs(v - g) <= abs(v - (180 - g)) else 180 - g
        row_angle = Criterion(v, s, pred, (v - pred) / s)
    steps = tuple(
        Criterion(v, s, *_nearest(v, c.step_heights, lambda h, s=s: np.hypot(s, model.model_rel * h)))
        for v, s in eff["steps"]
    )
    return MatchRow(
        rank=rank,
        hkl=c.hkl,
        termination=TerminationRef(c.termination_id, c.termination),
        cell=c.cell,
        probability=float(p),
        log_likelihood=float(ll),
        log_prior=float(c.log_prior),
        tilt=tilt,
        spacings=spacings,
        row_angle=row_angle,
        steps=steps,
        apparent_lattice=ApparentLattice(*c.apparent),
        d=c.d,
    )


def _face_marginals(candidates, prob):
    """Faces ranked by their summed probability."""
    total = {}
    for c, p in zip(candidates, prob):
        total[c.hkl] = total.get(c.hkl, 0.0) + float(p)
    ranked = sorted(total.items(), key=lambda kv: (-round(kv[1], 12), kv[0]))
    return tuple(FaceProbability(hkl=h, probability=p) for h, p in ranked)


def _verdict(best, second, n_candidates, faces):
    cell = "" if best.cell is None else f" {best.cell}"
    verdict = (
        f"Most likely {_hkl(best.hkl)} {best.termination.label}-terminated{cell}, probability {best.probability:.2f} "
        f"among {n_candidates} candidates; face {_hkl(faces[0].hkl)} with probability {faces[0].probability:.2f} "
        "over its terminations (a ranked hypothesis, not proof)."
    )
    warning = None
    if second is not None and second.probability > 0 and best.probability / second.probability < 2.0:
        warning = (
            f"Ambiguous: the runner-up {_hkl(second.hkl)} {second.termination.label}"
            f"{'' if second.cell is None else ' ' + second.cell} is within a factor of 2 "
            f"(p = {second.probability:.2f}); measure more (steps, a second spacing, the tilt) to separate them."
        )
        if len(faces) > 1 and faces[1].probability > 0 and faces[0].probability / faces[1].probability < 2.0:
            warning += f" The faces {_hkl(faces[0].hkl)} and {_hkl(faces[1].hkl)} are themselves within a factor of 2."
    return verdict, warning


def match(crystal, measurement, *, top=None, **options):
    """Rank the faces and terminations of ``crystal`` against ``measurement``.

    ``options`` go to :func:`termination.identification.candidates.candidate_table`;
    ``measurement.mount``, ``max_index`` and the visibility fields are used
    when the options do not set them.
    """
    opts = dict(options)
    opts.setdefault("mount", measurement.mount)
    opts.setdefault("max_index", measurement.max_index or MAX_INDEX)
    if "visibility" not in opts:
        opts["visibility"] = measurement_visibility(measurement)
    table = candidate_table(crystal, **opts)
    return score(table, measurement, top=top)


def measurement_visibility(measurement):
    """The corrugation model a measurement file asks for (visible species, weights, decay length)."""
    kw = {}
    if measurement.visible:
        kw["visible"] = measurement.visible
    if measurement.weights:
        kw["weights"] = measurement.weights
    if measurement.decay_length is not None:
        kw["decay_length_angstrom"] = measurement.decay_length
    return Visibility(**kw)
