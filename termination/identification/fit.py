"""Does the best candidate explain the measurements at all?  A goodness-of-fit test independent of the others.

Probabilities over candidates are relative: the best of several bad
candidates still gets probability near 1.  The fit check looks at the best
candidate alone.  Its standardised residuals z (measured minus the nearest
prediction, over the total sigma, for the tilt, each spacing, the row angle
and each step) would be standard normal if the candidate were right, so

- chi^2 = sum z^2 over the values, with the steps that the outlier allowance
  sets aside left out, has a chi-square distribution with one degree of
  freedom per value: the check fails when its tail probability is below
  ``alpha`` (default 10^-3);
- a step with |z| > 3 is an outlier; with an outlier fraction eps per step the
  number of outliers among n steps is binomial, and the check fails when
  more occur than the binomial tail allows at ``outlier_alpha`` (default
  0.05: none for a single step, one among 2 to 7 steps, two among up to 16);
- an outlier step higher than the range of the model's outlier density
  (50 Å) is one the model cannot weigh at all: the check fails.

When it fails, the residuals point at the likely causes (wrong mount face or
a face beyond --max-index for the tilt; a reconstruction or imaging species
not in the model, or the x/y calibration, for the lattice; the z calibration
or the structure for the steps).

A passed check is weak when no lattice was measured: tilt and steps alone
leave so much freedom (many faces, many multiples of d) that a structure the
candidates do not contain usually finds a face that passes.  On geometric
synthetic cases (``tests/calibration/run_calibration.py``) the check flags
15 % of such measurements with tilt and steps only and 97 % with the
lattice too; a passed check without a lattice therefore carries a caveat.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from termination.defaults import ROUNDING_EPS

__all__ = ["OUTLIER_Z", "FitCheck", "allowed_outliers", "chi_square_sf", "fit_check"]

#: A step farther than this many sigma from every allowed height is an outlier.
OUTLIER_Z = 3.0


@dataclass(frozen=True)
class FitCheck:
    """The goodness of fit of the best candidate.

    Attributes
    ----------
    fits : bool
        False when the residuals are too improbable for the model.
    chi_square : float
        Sum of squared standardised residuals (outlier steps set aside).
    dof : int
        Number of residuals in it.
    p_value : float
        Chi-square tail probability of ``chi_square``.
    step_outliers, allowed_step_outliers : int
        Steps with |z| > 3, and how many the outlier allowance accepts.
    alpha : float
        The test's threshold.
    worst : tuple of str
        The largest residual of each criterion, e.g. 'tilt +7.2σ'.
    causes : tuple of str
        What the failing residuals point at (empty when it fits).
    caveats : tuple of str
        What limits a passed check: without a measured lattice it seldom
        tells a structure outside the candidate set from the right one.
    """

    fits: bool
    chi_square: float
    dof: int
    p_value: float
    step_outliers: int
    allowed_step_outliers: int
    alpha: float
    worst: tuple[str, ...]
    causes: tuple[str, ...]
    caveats: tuple[str, ...] = ()


def chi_square_sf(x: float, dof: int) -> float:
    """Tail probability P(X >= x) of a chi-square variable with ``dof`` degrees of freedom (exact, no scipy).

    Notes
    -----
    Q(k/2, x/2): for even k, exp(-x/2) sum_{i<k/2} (x/2)^i / i!; for odd k,
    erfc(sqrt(x/2)) + exp(-x/2) sum_{i=1}^{(k-1)/2} (x/2)^(i-1/2) / Gamma(i + 1/2).

    Examples
    --------
    >>> round(chi_square_sf(3.841458820694124, 1), 6), round(chi_square_sf(5.991464547107979, 2), 6)
    (0.05, 0.05)
    """
    if dof <= 0:
        return 1.0
    if x <= 0:
        return 1.0
    h = x / 2.0
    if dof % 2 == 0:
        term, total = 1.0, 1.0
        for i in range(1, dof // 2):
            term *= h / i
            total += term
        return min(1.0, math.exp(-h) * total)
    total = math.erfc(math.sqrt(h))
    term = math.sqrt(h) / math.gamma(1.5)
    acc = 0.0
    for i in range(1, (dof - 1) // 2 + 1):
        acc += term
        term *= h / (i + 0.5)
    return min(1.0, total + math.exp(-h) * acc)


def allowed_outliers(n: int, fraction: float, alpha: float) -> int:
    """Smallest k with P(Binomial(n, fraction) > k) <= alpha: how many outlier steps are still plausible.

    The terms are summed in log space, so any n the measurement allows works
    (``comb(n, k)`` overflows a float from n of about 1030 on).  A tail equal
    to ``alpha`` on paper counts as within it: one step alone may not be an
    outlier at the default 5 %, since P(X > 0) = 0.05.

    >>> allowed_outliers(1, 0.05, 0.05), allowed_outliers(5, 0.05, 0.05), allowed_outliers(7, 0.05, 0.05)
    (0, 1, 1)
    >>> allowed_outliers(20, 0.05, 0.05), allowed_outliers(10_000, 0.05, 0.05)
    (3, 536)
    """
    if n <= 0:
        return 0
    log_f, log_g = math.log(fraction), math.log1p(-fraction)
    log_n = math.lgamma(n + 1)
    cdf = 0.0
    for k in range(n + 1):
        cdf += math.exp(log_n - math.lgamma(k + 1) - math.lgamma(n - k + 1) + k * log_f + (n - k) * log_g)
        if 1.0 - cdf <= alpha * (1 + ROUNDING_EPS):
            return k
    return n


_CAUSES = {
    "tilt": (
        "the tilt fits no variant of the face: check the mount face, raise --max-index for a higher-index face, "
        "or allow for how the sample sits on its holder (--mount-sigma)"
    ),
    "lattice": (
        "the corrugation does not match: a reconstruction or adsorbate cell not among the candidates (--cell), "
        "other imaging species (--visible, --weight), or the image's x/y calibration and drift"
    ),
    "steps": "step heights match no allowed step: check the z calibration, the lattice constant or the structure",
}


def fit_check(
    residuals: Sequence[tuple[str, float | None]],
    step_residuals: Sequence[float | None],
    *,
    outlier_fraction: float,
    alpha: float,
    outlier_alpha: float,
    steps_beyond_range: Sequence[float] = (),
    step_range_angstrom: float = math.inf,
) -> FitCheck:
    """Goodness of fit from the standardised residuals of the best candidate.

    Parameters
    ----------
    residuals : sequence of (criterion, z)
        Non-step residuals; criterion is 'tilt' or 'lattice'; z None or not finite: left out.
    step_residuals : sequence of float or None
        z of each measured step against its nearest allowed height; None (no allowed
        height at all) or not finite: an outlier.
    outlier_fraction : float
        Probability that a step is an outlier (the model's eps).
    alpha : float
        Threshold of the chi-square test.
    outlier_alpha : float
        Threshold of the outlier count.
    steps_beyond_range : sequence of float
        Outlier steps higher than ``step_range_angstrom``, Å: the outlier
        density of the model covers heights up to that range only, so the
        model cannot weigh them and the check fails, whatever the allowance.
    step_range_angstrom : float
        The range of the outlier density of steps, Å (for the message).

    Returns
    -------
    FitCheck
    """
    zs = [(name, float(z)) for name, z in residuals if z is not None and math.isfinite(z)]
    steps = [float(z) for z in step_residuals if z is not None and math.isfinite(z)]
    missing = len(step_residuals) - len(steps)  # a step with no allowed height at all
    outliers = sum(abs(z) > OUTLIER_Z for z in steps) + missing
    allowed = allowed_outliers(len(step_residuals), outlier_fraction, outlier_alpha)
    kept = [z for z in steps if abs(z) <= OUTLIER_Z] if outliers <= allowed else steps
    chi2 = sum(z * z for _, z in zs) + sum(z * z for z in kept)
    dof = len(zs) + len(kept)
    p = chi_square_sf(chi2, dof)
    beyond = [float(h) for h in steps_beyond_range]
    fits = p >= alpha and outliers <= allowed and not beyond
    worst = []
    for name in ("tilt", "lattice"):
        values = [z for n, z in zs if n == name]
        if values:
            w = max(values, key=abs)
            worst.append(f"{name} {w:+.1f}σ")
    if step_residuals:
        w = max(steps, key=abs) if steps else float("inf")
        worst.append(f"steps {w:+.1f}σ ({outliers} of {len(step_residuals)} beyond {OUTLIER_Z:g}σ)")
    causes: list[str] = []
    if not fits:
        for name in ("tilt", "lattice"):
            if any(abs(z) > OUTLIER_Z for n, z in zs if n == name):
                causes.append(_CAUSES[name])
        if beyond:
            causes.append(
                f"a step of {max(beyond):g} Å lies beyond the {step_range_angstrom:g} Å range of the step model and "
                "matches no allowed step (a step bunch, or the z calibration)"
            )
        if outliers > allowed or any(abs(z) > OUTLIER_Z for z in kept):
            causes.append(_CAUSES["steps"])
        if not causes:
            causes.append("several values are each a little off: check the stated uncertainties")
        if len(causes) >= 3 and not beyond:
            causes.append("nothing fits: is it the right structure and lattice constant?")
    caveats: list[str] = []
    if fits and not any(n == "lattice" for n, _ in zs):
        caveats.append(
            "no corrugation lattice measured: tilt and steps alone seldom reveal a wrong structure or lattice "
            "constant (give --spacing and --row-angle to test it)"
        )
    return FitCheck(fits, chi2, dof, p, outliers, allowed, alpha, tuple(worst), tuple(causes), tuple(caveats))
