"""Measured corrugation against predicted apparent lattices: spacings and row angle matched as one lattice.

Two measured spacings s1, s2 (and a row angle alpha when measured) describe
one 2D lattice.  They are compared with every *reading* of a predicted
apparent lattice: its reduced basis (|a|, |b|, gamma) and its row spacings
(A/|a|, A/|b|, gamma) with A the cell area, in either order, with the row
angle read as gamma or 180° - gamma.  A square net of side a therefore
cannot stand in for a rectangle a x a sqrt 2 at 90°: its reduced basis is
(a, a, 90°) and the pair (a, a sqrt 2) comes with 45°.

Densities are Student-t with ``tail_dof`` degrees of freedom (a larger miss
always scores lower, one wild value does not rule a candidate out alone).
A predicted lattice that is not there (a flat termination, or the missing
second period of stripes) gives the measured value a uniform density over
its range instead.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from termination.arrays import FloatArray

__all__ = [
    "ANGLE_RANGE_DEG",
    "SPACING_RANGE_ANGSTROM",
    "angle_log_likelihood",
    "lattice_readings",
    "log_student",
    "pair_log_likelihood",
    "periodicities",
    "spacing_log_likelihood",
]

#: Range of the uniform density of a spacing that no predicted period explains, Å.
SPACING_RANGE_ANGSTROM = 50.0
#: Range of the uniform density of a row angle that no predicted lattice explains, degrees.
ANGLE_RANGE_DEG = 180.0


def log_student(x: FloatArray | float, mu: FloatArray | float, s: FloatArray | float, dof: float) -> FloatArray:
    """log of the Student-t density with location mu, scale s and ``dof`` degrees of freedom.

    Notes
    -----
    log t(x) = lgamma((nu+1)/2) - lgamma(nu/2) - log(sqrt(nu pi) s) - (nu+1)/2 log(1 + z^2/nu),
    z = (x - mu)/s.  NaN where mu is NaN.

    Examples
    --------
    >>> bool(log_student(0.0, 0.0, 1.0, 4.0) > log_student(6.0, 0.0, 1.0, 4.0) > log_student(88.0, 0.0, 1.0, 4.0))
    True
    """
    z = (np.asarray(x, float) - np.asarray(mu, float)) / np.asarray(s, float)
    const = math.lgamma((dof + 1) / 2) - math.lgamma(dof / 2) - 0.5 * math.log(dof * math.pi)
    with np.errstate(invalid="ignore"):
        return np.asarray(const - np.log(s) - (dof + 1) / 2 * np.log1p(z * z / dof), float)


def lattice_readings(a: float, b: float, gamma: float) -> FloatArray:
    """The ways a lattice (a, b, gamma) can be read as two spacings and an angle: (R, 3) rows (p1, p2, angle).

    The reduced basis, and the spacings of the rows along a and along b.
    Stripes (b infinite) give (a, NaN, NaN); a flat pattern (a infinite) NaN.

    Examples
    --------
    >>> lattice_readings(3.0, 4.0, 90.0).tolist()
    [[3.0, 4.0, 90.0], [4.0, 3.0, 90.0]]
    """
    nan = float("nan")
    if not math.isfinite(a):
        return np.full((1, 3), nan)
    if not (math.isfinite(b) and math.isfinite(gamma)):
        return np.array([[a, nan, nan]])
    area = a * b * math.sin(math.radians(gamma))
    return np.array([[a, b, gamma], [area / a, area / b, gamma]])


def periodicities(a: float, b: float, gamma: float, row_spacings: Sequence[float] = ()) -> tuple[float, ...]:
    """The five periods one spacing may be: three shortest lattice-vector lengths and two row spacings, Å.

    NaN for what a flat or striped pattern does not have.
    """
    nan = float("nan")
    if not math.isfinite(a):
        return (nan,) * 5
    if not (math.isfinite(b) and math.isfinite(gamma)):
        rows = [r for r in row_spacings if math.isfinite(r)][:1] or [a]
        return (float(a), nan, nan, float(rows[0]), nan)
    g = math.radians(gamma)
    third = min(math.sqrt(a * a + b * b + 2 * a * b * math.cos(g)), math.sqrt(a * a + b * b - 2 * a * b * math.cos(g)))
    area = a * b * math.sin(g)
    rows = [r for r in row_spacings if math.isfinite(r)][:2] or [area / a, area / b]
    if len(rows) == 1:
        rows.append(rows[0])
    return (float(a), float(b), float(third), float(rows[0]), float(rows[1]))


def _spacing_sigma(sigma: float, predicted: FloatArray, model_rel: float) -> FloatArray:
    return np.sqrt(sigma**2 + (model_rel * np.nan_to_num(predicted)) ** 2)


def _angle_terms(alpha: float, sigma: float, gamma: FloatArray, dof: float) -> FloatArray:
    """log of 0.5 t(alpha; gamma) + 0.5 t(alpha; 180 - gamma), or the uniform density where gamma is NaN."""
    g = np.where(np.isnan(gamma), 90.0, gamma)  # placeholder where no lattice is predicted
    near = log_student(alpha, g, sigma, dof)
    far = log_student(alpha, 180.0 - g, sigma, dof)
    out = np.logaddexp(near, far) - math.log(2.0)
    return np.where(np.isnan(gamma), -math.log(ANGLE_RANGE_DEG), out)


def pair_log_likelihood(
    readings: FloatArray,
    weights: FloatArray,
    s1: tuple[float, float],
    s2: tuple[float, float],
    alpha: tuple[float, float] | None,
    *,
    model_rel: float,
    dof: float,
) -> tuple[float, int, bool]:
    """log likelihood of two spacings (and a row angle) under a mixture of lattice readings.

    Parameters
    ----------
    readings : (R, 3) FloatArray
        Rows (p1, p2, angle) from :func:`lattice_readings` of every lattice the candidate may show.
    weights : (R,) FloatArray
        Prior weight of each reading (sums to 1).
    s1, s2 : (value, sigma)
        The measured spacings, Å.
    alpha : (value, sigma) or None
        The measured row angle, degrees.
    model_rel, dof : float
        Relative model uncertainty of predicted lengths; Student-t degrees of freedom.

    Returns
    -------
    log_l : float
    best : int
        Index of the reading that contributes most.
    swapped : bool
        Whether that reading matches s1 to p2 and s2 to p1.
    """
    p1, p2, g = readings[:, 0], readings[:, 1], readings[:, 2]
    span = -math.log(SPACING_RANGE_ANGSTROM)

    def spacing(value: tuple[float, float], p: FloatArray) -> FloatArray:
        lt = log_student(value[0], p, _spacing_sigma(value[1], p, model_rel), dof)
        return np.where(np.isnan(p), span, lt)

    straight = spacing(s1, p1) + spacing(s2, p2)
    swapped = spacing(s1, p2) + spacing(s2, p1)
    if alpha is not None:
        ang = _angle_terms(alpha[0], alpha[1], g, dof)
        straight = straight + ang
        swapped = swapped + ang
    with np.errstate(divide="ignore"):
        logw = np.log(weights)
    terms = np.stack([straight, swapped]) + logw[None, :] - math.log(2.0)
    flat = int(np.argmax(terms))
    total = float(np.logaddexp.reduce(terms.ravel()))
    return total, flat % len(weights), flat >= len(weights)


def spacing_log_likelihood(
    value: tuple[float, float], periods: FloatArray, weights: FloatArray, *, model_rel: float, dof: float
) -> float:
    """log likelihood of one spacing: a mixture over the predicted periods (NaN: the uniform density).

    ``periods`` and ``weights`` are (P,) arrays; weights sum to 1.
    """
    sigma = _spacing_sigma(value[1], periods, model_rel)
    lt = np.where(np.isnan(periods), -math.log(SPACING_RANGE_ANGSTROM), log_student(value[0], periods, sigma, dof))
    with np.errstate(divide="ignore"):
        return float(np.logaddexp.reduce(lt + np.log(weights)))


def angle_log_likelihood(value: tuple[float, float], gammas: FloatArray, weights: FloatArray, *, dof: float) -> float:
    """log likelihood of a row angle alone: a mixture over the predicted lattices' angles."""
    terms = _angle_terms(value[0], value[1], gammas, dof)
    with np.errstate(divide="ignore"):
        return float(np.logaddexp.reduce(terms + np.log(weights)))
