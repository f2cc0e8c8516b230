"""The parameters of the identification model: uncertainties, tails, outlier allowance, prior strengths, fit test.

Every number the likelihood and the prior use is a field of
:class:`MatchModel`, with its unit in its name; the module notes of
:mod:`termination.identification.likelihood` give the formulas.
"""

from __future__ import annotations

from dataclasses import dataclass, fields

from termination.defaults import MAX_MULTIPLE
from termination.errors import MeasurementError

__all__ = ["MatchModel"]


@dataclass(frozen=True)
class MatchModel:
    """Parameters of the likelihood model, the prior and the fit check.

    Attributes
    ----------
    tilt_sigma_deg, row_angle_sigma_deg : float
        Default uncertainties when a measurement states none, degrees.
    mount_sigma_deg : float
        How far the sample may sit off its nominal mount face (glue, holder,
        cleave): added in quadrature to every tilt's sigma, degrees.
    spacing_rel, spacing_min_angstrom : float
        Default spacing uncertainty: max(spacing_rel * s, spacing_min).
    step_rel, step_min_angstrom : float
        Default step uncertainty: max(step_rel * h, step_min).
    model_rel : float
        Relative model uncertainty added in quadrature to predicted lengths
        (relaxation, tip convolution).
    tail_dof : float
        Degrees of freedom of the Student-t densities of spacings and row
        angles: heavy tails, so that a larger miss always scores worse than a
        smaller one but one bad value does not decide alone.
    step_decay : float
        rho: weight ratio of an n+1-period step to an n-period step.
    step_outlier_fraction : float
        eps: probability that a measured step is not explained by the face.
    step_range_angstrom : float
        h_max: range of the uniform outlier density of steps, Å.
    max_multiple : int
        Steps up to this many extra periods d.
    index_weight, bond_weight : float
        Prior strengths (per unit of |h|+|k|+|l|, per unit of relative
        broken-bond density).
    mixed_share : float
        Prior mass of a face given to terraces of two terminations together.
    max_mixed_classes : int
        Mixed-terrace hypotheses pair the cheapest this-many terminations of a face.
    reconstructed_share : float
        Prior mass of a polar termination given to its reconstruction cells.
    user_cell_share : float
        Prior mass of a termination given to the cells the user names
        (``--cell``), in equal parts, on the faces whose mesh they fit.
    flat_prior : bool
        Every candidate equally likely a priori.
    fit_alpha : float
        The fit check fails when the best candidate's residuals are this
        improbable (chi-square tail probability).
    fit_outlier_alpha : float
        ... or when more step outliers occur than a binomial tail of this
        probability allows.
    """

    tilt_sigma_deg: float = 2.0
    mount_sigma_deg: float = 1.5
    row_angle_sigma_deg: float = 3.0
    spacing_rel: float = 0.05
    spacing_min_angstrom: float = 0.1
    step_rel: float = 0.05
    step_min_angstrom: float = 0.1
    model_rel: float = 0.02
    tail_dof: float = 4.0
    step_decay: float = 0.5
    step_outlier_fraction: float = 0.05
    step_range_angstrom: float = 50.0
    max_multiple: int = MAX_MULTIPLE
    index_weight: float = 0.3
    bond_weight: float = 1.0
    mixed_share: float = 0.2
    max_mixed_classes: int = 3
    reconstructed_share: float = 0.5
    user_cell_share: float = 0.5
    flat_prior: bool = False
    fit_alpha: float = 1e-3
    fit_outlier_alpha: float = 0.05

    def __post_init__(self) -> None:
        for f in fields(self):
            value = getattr(self, f.name)
            if f.name == "flat_prior":
                continue
            ok = isinstance(value, (int, float)) and not isinstance(value, bool) and value == value
            if f.name in ("mount_sigma_deg", "index_weight", "bond_weight"):
                ok = ok and 0 <= value < float("inf")
            elif f.name in (
                "step_decay",
                "step_outlier_fraction",
                "mixed_share",
                "reconstructed_share",
                "user_cell_share",
                "fit_alpha",
                "fit_outlier_alpha",
            ):
                ok = ok and 0 < value < 1
            elif f.name in ("max_multiple", "max_mixed_classes"):
                ok = ok and int(value) == value and 0 <= value <= 50
            else:
                ok = ok and 0 < value < float("inf")
            if not ok:
                raise MeasurementError(f"model parameter {f.name} out of range: {value!r}")
