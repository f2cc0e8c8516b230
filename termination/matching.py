"""Rank faces and terminations against measurements: the main job.

A candidate is a face (hkl) with one of its terminations, and, where a
measured spacing asks for a supercell, one of the reconstruction cells that
could compensate a polar termination.  Each candidate predicts

- its tilt to the mount face, for each symmetry variant of the face;
- the periodicities and row angle of the corrugation it shows (the apparent
  lattice of :mod:`termination.corrugation`);
- the step heights between its terraces and those of the other terminations
  of the face (:mod:`termination.terminations`).

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
    from :mod:`termination.polarity`.  ``flat_prior`` makes every candidate
    equally likely a priori.
"""

from dataclasses import dataclass, field

import numpy as np

from .errors import MeasurementError, StructureError
from .measurement import Measurement, Value
from .planes import check_hkl, distinct_faces, hkl_text as _hkl
from .report import StructureSummary, summarise_structure
from .terminations import face_terminations

__all__ = [
    "MatchModel",
    "Candidate",
    "CandidateTable",
    "Criterion",
    "MatchRow",
    "MatchReport",
    "FaceProbability",
    "candidate_table",
    "score",
    "match",
    "effective_measurement",
    "synthetic_measurement",
]


@dataclass(frozen=True)
class MatchModel:
    """Parameters of the likelihood model and prior (see the module notes).

    Attributes
    ----------
    tilt_sigma_deg, row_angle_sigma_deg : float
        Default uncertainties when a measurement states none, degrees.
    spacing_rel, spacing_min_angstrom : float
        Default spacing uncertainty: max(spacing_rel * s, spacing_min).
    step_rel, step_min_angstrom : float
        Default step uncertainty: max(step_rel * h, step_min).
    model_rel : float
        Relative model uncertainty added in quadrature to predicted lengths.
    step_decay : float
        rho: weight ratio of an n+1-period step to an n-period step.
    outlier_fraction : float
        eps: probability that a measured step is not explained by the face.
    outlier_range_angstrom : float
        h_max: range of the outlier floor (raised to 1.5 x the largest step).
    max_multiple : int
        Steps up to this many extra periods d.
    index_weight, bond_weight : float
        Prior strengths.
    flat_prior : bool
    """

    tilt_sigma_deg: float = 2.0
    row_angle_sigma_deg: float = 3.0
    spacing_rel: float = 0.05
    spacing_min_angstrom: float = 0.1
    step_rel: float = 0.05
    step_min_angstrom: float = 0.1
    model_rel: float = 0.02
    step_decay: float = 0.5
    outlier_fraction: float = 0.05
    outlier_range_angstrom: float = 20.0
    max_multiple: int = 3
    index_weight: float = 0.3
    bond_weight: float = 1.0
    flat_prior: bool = False


@dataclass(frozen=True)
class Candidate:
    """What one face x termination (x cell) predicts; independent of the measurement.

    Attributes
    ----------
    hkl : tuple of int
    termination : str
        Termination label.
    termination_id : str
    cell : str or None
        Reconstruction cell (Wood or matrix notation); None for 1x1.
    d : float
        Plane spacing, Å.
    tilts : tuple of float
        Tilt of each upward-facing variant to the mount, degrees (empty without a mount).
    tilt_variants : tuple of tuple
        The variants, same order.
    periodicities : tuple of float
        The K predicted spacings, Å.
    apparent : tuple of float
        Apparent lattice (a, b, gamma).
    step_heights, step_weights : tuple of float
        Allowed step heights (Å) from this termination and their mixture weights.
    step_labels : tuple of str
        'T1->T2' style description of each height.
    log_prior : float
    polar : bool or None
    """

    hkl: tuple
    termination: str
    termination_id: str
    cell: str | None
    d: float
    tilts: tuple
    tilt_variants: tuple
    periodicities: tuple
    apparent: tuple
    step_heights: tuple
    step_weights: tuple
    step_labels: tuple
    log_prior: float
    polar: bool | None = None


@dataclass(frozen=True, eq=False)
class CandidateTable:
    """All candidates of a crystal for one mount, with the options that made them."""

    structure: StructureSummary
    mount: tuple | None
    max_index: int
    candidates: tuple
    model: MatchModel
    visibility: dict = field(default_factory=dict)
    notes: tuple = ()


@dataclass(frozen=True)
class Criterion:
    """One measured value against a candidate's prediction."""

    measured: float
    sigma: float
    predicted: float | None
    residual: float | None


@dataclass(frozen=True)
class MatchRow:
    rank: int
    hkl: tuple
    termination: str
    termination_id: str
    cell: str | None
    probability: float
    log_likelihood: float
    log_prior: float
    tilt: Criterion | None
    spacings: tuple
    row_angle: Criterion | None
    steps: tuple
    apparent_lattice: dict
    d: float


@dataclass(frozen=True)
class FaceProbability:
    """Posterior probability of a face, summed over its terminations and cells."""

    hkl: tuple
    probability: float


@dataclass(frozen=True)
class MatchReport:
    structure: StructureSummary
    mount: tuple | None
    measurement: dict
    candidates: tuple
    faces: tuple
    verdict: str
    warning: str | None
    notes: tuple


# --------------------------------------------------------------------------- candidates


def _upward_tilts(crystal, variants, mount):
    """Tilts (degrees) of the variants whose normals lie within 90° of the mount normal."""
    B = crystal.reciprocal
    m = np.asarray(mount, dtype=float) @ B
    m /= np.linalg.norm(m)
    V = np.asarray(variants, dtype=float) @ B
    V /= np.linalg.norm(V, axis=1)[:, None]
    ang = np.degrees(np.arccos(np.clip(V @ m, -1.0, 1.0)))
    keep = ang <= 90.0 + 1e-6
    return tuple(float(a) for a in ang[keep]), tuple(v for v, k in zip(variants, keep) if k)


def _periodicities(a, b, gamma, row_spacings):
    """K = 5 predicted spacings: three shortest lattice-vector lengths and two row spacings."""
    if not np.isfinite(a):  # flat: nothing visible
        return (float("nan"),) * 5
    if not (np.isfinite(b) and np.isfinite(gamma)):  # stripes: one periodicity and its row spacing
        rows = [r for r in row_spacings if np.isfinite(r)][:1] or [a]
        return (float(a), float("nan"), float("nan"), float(rows[0]), float("nan"))
    g = np.radians(gamma)
    third = min(np.sqrt(a * a + b * b + 2 * a * b * np.cos(g)), np.sqrt(a * a + b * b - 2 * a * b * np.cos(g)))
    area = a * b * np.sin(g)
    rows = [r for r in row_spacings if np.isfinite(r)][:2] or [area / a, area / b]
    if len(rows) == 1:
        rows.append(rows[0])
    return (float(a), float(b), float(third), float(rows[0]), float(rows[1]))


def _step_mixture(ft, t, model):
    """Allowed heights from termination t (up and down) with weights rho^n."""
    d = ft.d
    heights, weights, labels = [], [], []
    z = {x.id: ft.layers[x.layers[0]].height for x in ft.terminations}
    for other in ft.terminations:
        delta_up = (z[other.id] - z[t.id]) % d
        if delta_up > d - 1e-6:
            delta_up = 0.0
        for direction, delta in (("up", delta_up), ("down", (d - delta_up) % d)):
            if other.id == t.id and direction == "down":
                continue  # same termination: n d up and down are one height
            for n in range(model.max_multiple + 1):
                h = delta + n * d
                if h <= 1e-6:
                    continue
                heights.append(h)
                weights.append(model.step_decay ** n)
                labels.append(f"{t.id}->{other.id} {direction}")
    w = np.array(weights)
    return tuple(heights), tuple(w / w.sum()), tuple(labels)


def candidate_table(
    crystal,
    mount=None,
    max_index=3,
    *,
    visible=None,
    weights=None,
    decay_length_angstrom=None,
    model=None,
    reconstructions=True,
    charges=None,
    max_cell=4,
    **termination_options,
):
    """Predictions of every face x termination (x reconstruction) of ``crystal``.

    Parameters
    ----------
    crystal : Crystal
    mount : 3 ints, optional
        Mount face; without it the tilt cannot be scored.
    max_index : int
        Largest Miller index of the candidate faces.
    visible, weights, decay_length_angstrom
        Visibility options of :func:`termination.corrugation.termination_corrugation`.
    model : MatchModel, optional
    reconstructions : bool
        Add reconstruction cells of polar terminations as candidates.
    charges : dict, optional
        Formal charges per element for the polarity check.
    max_cell : int
        Largest supercell index of reconstruction candidates.
    termination_options
        Passed to :func:`termination.terminations.face_terminations`.

    Returns
    -------
    CandidateTable
    """
    from .corrugation import termination_corrugation

    model = model or MatchModel()
    mount = None if mount is None else check_hkl(mount, "mount")
    faces = distinct_faces(crystal, max_index=max_index, mount=mount)
    vis = _visibility_options(visible, weights, decay_length_angstrom)
    _check_visibility(crystal, vis)
    crystal, polar_info, notes = _polarity_provider(crystal, charges, reconstructions, max_cell, vis)
    per_face = []
    for f in faces:
        ft = face_terminations(crystal, f.hkl, face=f, max_multiple=model.max_multiple, **termination_options)
        per_face.append((f, ft))
    w_min = min(t.weighted_bonds_per_nm2 for _, ft in per_face for t in ft.terminations)
    w_min = max(w_min, 1e-9)
    rows = []
    for f, ft in per_face:
        tilts, variants = ((), ()) if mount is None else _upward_tilts(crystal, f.variants, mount)
        w_face = max(min(t.weighted_bonds_per_nm2 for t in ft.terminations), 1e-9)
        log_face = -model.index_weight * (sum(abs(v) for v in f.hkl) - 1) - model.bond_weight * (w_face / w_min - 1)
        log_t = np.array([-model.bond_weight * (t.weighted_bonds_per_nm2 / w_face - 1) for t in ft.terminations])
        log_t -= np.log(np.exp(log_t).sum())
        for t, lt in zip(ft.terminations, log_t):
            try:
                pattern = termination_corrugation(ft, t.id, **vis)
            except StructureError:  # none of the visible species near this surface
                pattern = None
            lat = _NO_LATTICE if pattern is None else pattern.apparent_lattice
            heights, sw, labels = _step_mixture(ft, t, model)
            base = dict(
                hkl=f.hkl, termination=t.label, termination_id=t.id, d=ft.d, tilts=tilts, tilt_variants=variants,
                step_heights=heights, step_weights=sw, step_labels=labels,
            )
            polar, recon = polar_info(ft, t) if polar_info else (None, ())
            share = np.log(1 - RECONSTRUCTED_SHARE) if recon else 0.0
            share_cell = np.log(RECONSTRUCTED_SHARE / len(recon)) if recon else 0.0
            rows.append(
                Candidate(
                    cell=None,
                    periodicities=_periodicities(lat.a, lat.b, lat.gamma, () if pattern is None else pattern.row_spacings),
                    apparent=(lat.a, lat.b, lat.gamma),
                    log_prior=float(log_face + lt + share),
                    polar=polar,
                    **base,
                )
            )
            for cell_name, rpat in recon:
                rl = rpat.apparent_lattice
                rows.append(
                    Candidate(
                        cell=cell_name,
                        periodicities=_periodicities(rl.a, rl.b, rl.gamma, rpat.row_spacings),
                        apparent=(rl.a, rl.b, rl.gamma),
                        log_prior=float(log_face + lt + share_cell),
                        polar=polar,
                        **base,
                    )
                )
    if model.flat_prior:
        rows = [Candidate(**{**r.__dict__, "log_prior": 0.0}) for r in rows]
    lp = np.array([r.log_prior for r in rows])
    lp -= _logsumexp(lp)
    rows = tuple(Candidate(**{**r.__dict__, "log_prior": float(v)}) for r, v in zip(rows, lp))
    return CandidateTable(
        structure=summarise_structure(crystal),
        mount=mount,
        max_index=int(max_index),
        candidates=rows,
        model=model,
        visibility=vis,
        notes=tuple(notes),
    )


class _NoLattice:
    a = b = gamma = float("nan")


_NO_LATTICE = _NoLattice()


def _visibility_options(visible, weights, decay_length_angstrom):
    out = {}
    if visible:
        out["visible"] = tuple(visible)
    if weights:
        out["weights"] = dict(weights)
    if decay_length_angstrom is not None:
        out["decay_length_angstrom"] = float(decay_length_angstrom)
    return out


def _check_visibility(crystal, vis):
    """Visible species and weights must name elements of the crystal, and one must image.

    Checked once for the crystal: per termination a species that is merely
    absent from the top unit makes that termination flat, which is a result.
    """
    from .corrugation import species_weights
    from .elements import check_symbol

    present = sorted(set(crystal.species))

    def known(el, what):
        try:
            norm = check_symbol(el)
        except StructureError as exc:
            raise MeasurementError(f"{what} {el!r}: {exc}") from None
        if norm not in present:
            raise MeasurementError(f"{what} {norm!r} is not in this crystal ({', '.join(present)})")
        return norm

    visible = {known(el, "visible species") for el in vis.get("visible", ())}
    weights = {known(el, "weighted species"): float(w) for el, w in vis.get("weights", {}).items()}
    if not np.any(species_weights(present, visible or None, weights) > 0):
        raise MeasurementError(f"no species images: the visibility weights of {', '.join(present)} are all zero")


def _polarity_provider(crystal, charges, reconstructions, max_cell, vis):
    """Charged crystal and a function (ft, termination) -> (polar, [(cell, pattern), ...]).

    Without formal charges (given, from the file, or the built-in guess) the
    polarity is not assessed and no reconstruction candidates are added.
    """
    from .charges import assign_charges

    found = assign_charges(crystal, charges, use_pymatgen=False, required=charges is not None)
    if found is None:
        return crystal, None, ["no formal charges known (give --charge EL=Q): polarity not assessed, "
                               "no reconstruction candidates"]
    from .corrugation import reconstruction_corrugation
    from .polarity import termination_polarity

    notes = [f"formal charges {found.method}: "
             + ", ".join(f"{el} {q:+g}" for el, q in found.charges.items())]
    if found.caution:
        notes.append(found.caution)
    charged = crystal.with_charges(found.per_atom)

    def info(ft, t):
        pol = termination_polarity(charged, ft, t.id, max_cell=max_cell, with_reconstructions=reconstructions)
        cells = []
        for r in pol.reconstructions[:MAX_CELLS_PER_TERMINATION]:
            try:
                pattern = reconstruction_corrugation(ft, t.id, r, **vis)
            except StructureError:
                continue
            cells.append((pattern.cell, pattern))
        return pol.tasker_type == "III", cells

    return charged, info, notes


#: Reconstruction cells kept per polar termination (the polarity step ranks them).
MAX_CELLS_PER_TERMINATION = 4
#: Prior mass of a polar termination given to its reconstruction cells together.
RECONSTRUCTED_SHARE = 0.5


# --------------------------------------------------------------------------- scoring


def _logsumexp(x, axis=None):
    x = np.asarray(x, dtype=float)
    m = np.max(x, axis=axis, keepdims=True)
    m = np.where(np.isfinite(m), m, 0.0)
    with np.errstate(divide="ignore"):
        out = np.log(np.sum(np.exp(x - m), axis=axis, keepdims=True)) + m
    return np.squeeze(out, axis=axis) if axis is not None else float(out.squeeze())


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
            out["tilt"] = np.where(n > 0, _logsumexp(lp, axis=1) - np.log(np.maximum(n, 1)), -np.inf)
    if len(eff["spacings"]):
        P = np.array([c.periodicities for c in cands])  # (C, K)
        s_m, sig = eff["spacings"][:, 0], eff["spacings"][:, 1]
        s_tot = np.sqrt(sig[None, None, :] ** 2 + (model.model_rel * P[:, :, None]) ** 2)
        lp = _log_normal(s_m[None, None, :], P[:, :, None], s_tot)  # (C, K, M)
        lp = np.where(np.isnan(lp), -np.inf, lp)  # no visible lattice predicted
        mix = _logsumexp(lp, axis=1) - np.log(P.shape[1])
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
        mix = _logsumexp(lp, axis=1)  # (C, M)
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
    prob = np.exp(post - _logsumexp(post))
    order = np.lexsort((np.arange(len(prob)), -np.round(prob, 12)))
    shown = order if top is None else order[: int(top)]
    rows = tuple(_row(rank + 1, table.candidates[i], prob[i], loglik[i], eff, table.model) for rank, i in enumerate(shown))
    faces = _face_marginals(table.candidates, prob)
    second = None if len(order) < 2 else _row(2, table.candidates[order[1]], prob[order[1]], loglik[order[1]], eff,
                                               table.model)
    verdict, warning = _verdict(rows[0], second, len(table.candidates), faces)
    notes = table.notes + (
        "An identification is a ranked hypothesis from a model, not proof: confirm it with an independent probe.",
    )
    return MatchReport(
        structure=table.structure,
        mount=table.mount,
        measurement=_echo(eff),
        candidates=rows,
        faces=faces,
        verdict=verdict,
        warning=warning,
        notes=notes,
    )


def _echo(eff):
    def pairs(a):
        return [{"value": float(v), "sigma": float(s)} for v, s in a]

    return {
        "tilt": None if eff["tilt"] is None else {"value": eff["tilt"][0], "sigma": eff["tilt"][1]},
        "row_angle": None if eff["row_angle"] is None else {"value": eff["row_angle"][0], "sigma": eff["row_angle"][1]},
        "spacings": pairs(eff["spacings"]),
        "steps": pairs(eff["steps"]),
    }


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
        termination=c.termination,
        termination_id=c.termination_id,
        cell=c.cell,
        probability=float(p),
        log_likelihood=float(ll),
        log_prior=float(c.log_prior),
        tilt=tilt,
        spacings=spacings,
        row_angle=row_angle,
        steps=steps,
        apparent_lattice={"a": c.apparent[0], "b": c.apparent[1], "gamma": c.apparent[2]},
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
        f"Most likely {_hkl(best.hkl)} {best.termination}-terminated{cell}, probability {best.probability:.2f} "
        f"among {n_candidates} candidates; face {_hkl(faces[0].hkl)} with probability {faces[0].probability:.2f} "
        "over its terminations (a ranked hypothesis, not proof)."
    )
    warning = None
    if second is not None and second.probability > 0 and best.probability / second.probability < 2.0:
        warning = (
            f"Ambiguous: the runner-up {_hkl(second.hkl)} {second.termination}"
            f"{'' if second.cell is None else ' ' + second.cell} is within a factor of 2 "
            f"(p = {second.probability:.2f}); measure more (steps, a second spacing, the tilt) to separate them."
        )
        if len(faces) > 1 and faces[1].probability > 0 and faces[0].probability / faces[1].probability < 2.0:
            warning += (
                f" The faces {_hkl(faces[0].hkl)} and {_hkl(faces[1].hkl)} are themselves within a factor of 2."
            )
    return verdict, warning


def match(crystal, measurement, *, top=None, **options):
    """Rank the faces and terminations of ``crystal`` against ``measurement``.

    ``options`` go to :func:`candidate_table`; ``measurement.mount``,
    ``max_index`` and the visibility fields are used when the options do not
    set them.
    """
    opts = dict(options)
    opts.setdefault("mount", measurement.mount)
    opts.setdefault("max_index", measurement.max_index or 3)
    if measurement.visible and "visible" not in opts:
        opts["visible"] = measurement.visible
    if measurement.weights and "weights" not in opts:
        opts["weights"] = measurement.weights
    if measurement.decay_length is not None and "decay_length_angstrom" not in opts:
        opts["decay_length_angstrom"] = measurement.decay_length
    table = candidate_table(crystal, **opts)
    return score(table, measurement, top=top)


def synthetic_measurement(table, index, rng, *, tilt_sigma=1.5, spacing_sigma=0.1, row_angle_sigma=3.0,
                          step_sigma=0.08, n_spacings=2, n_steps=5):
    """Draw a measurement from the likelihood model of candidate ``index``.

    Used to test recovery and calibration: tilt from a random upward variant,
    spacings from the candidate's periodicities, row angle from its apparent
    lattice, steps from its step mixture (with the outlier floor), each with
    Gaussian noise of the stated sigma plus the model's relative uncertainty.

    Parameters
    ----------
    table : CandidateTable
    index : int
        Candidate to simulate.
    rng : numpy.random.Generator

    Returns
    -------
    Measurement
    """
    model = table.model
    c = table.candidates[index]

    def noisy(mu, s, rel=0.0):
        return float(mu + rng.normal() * np.hypot(s, rel * mu))

    tilt = None
    if table.mount is not None and c.tilts:
        tilt = Value(min(max(noisy(rng.choice(c.tilts), tilt_sigma), 0.0), 90.0), tilt_sigma)
    spacings = []
    for _ in range(n_spacings):
        p = float(rng.choice(c.periodicities))
        if rng.random() < model.outlier_fraction or not np.isfinite(p):
            spacings.append(Value(float(rng.uniform(0.5, model.outlier_range_angstrom)), spacing_sigma))
        else:
            spacings.append(Value(abs(noisy(p, spacing_sigma, model.model_rel)), spacing_sigma))
    spacings = tuple(spacings)
    g = c.apparent[2] if rng.random() < 0.5 else 180.0 - c.apparent[2]
    if rng.random() < model.outlier_fraction or not np.isfinite(g):
        g = float(rng.uniform(1.0, 179.0))
    row_angle = Value(min(max(noisy(g, row_angle_sigma), 1.0), 179.0), row_angle_sigma)
    heights = []
    h_max = model.outlier_range_angstrom
    for _ in range(n_steps):
        if rng.random() < model.outlier_fraction:
            heights.append(float(rng.uniform(0.05, h_max)))
        else:
            k = rng.choice(len(c.step_heights), p=np.asarray(c.step_weights))
            heights.append(abs(noisy(c.step_heights[k], step_sigma, model.model_rel)) or 0.01)
    steps = tuple(Value(h, step_sigma) for h in heights)
    return Measurement(mount=table.mount, tilt=tilt, row_angle=row_angle, spacings=spacings, steps=steps)
