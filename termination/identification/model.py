"""The parameters of the identification model: uncertainties, outlier allowance and prior strengths."""

from __future__ import annotations

from dataclasses import dataclass

from termination.defaults import MAX_MULTIPLE

__all__ = ["RECONSTRUCTED_SHARE", "MatchModel"]

#: Prior mass of a polar termination given to its reconstruction cells together.
RECONSTRUCTED_SHARE = 0.5


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
    max_multiple: int = MAX_MULTIPLE
    index_weight: float = 0.3
    bond_weight: float = 1.0
    flat_prior: bool = False
