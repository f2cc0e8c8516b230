"""The verdict of an identification: the best candidate in words, what decided it, and when to measure more.

The verdict states the best candidate (or, when the fit check fails, that
none explains the measurements, with the likely causes first); names the
criterion that separated it from the runner-up, or says that only the prior
did; and warns when the runner-up is within a factor of 2, naming the
measurement that would separate the two.  Candidates whose predictions are
identical (symmetry-equivalent surfaces, mirror-image stacks) are never
rivals: no measurement of these kinds can tell them apart, and the verdict
says so instead of asking for more data.
"""

from __future__ import annotations

import math
import re
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from termination.identification.candidates import Candidate
from termination.identification.fit import FitCheck
from termination.surface.miller import face_text

__all__ = ["Verdict", "same_predictions", "separating_measurement", "verdict"]


@dataclass(frozen=True)
class Verdict:
    """The verdict sentence, what decided the ranking, and an ambiguity warning (or None)."""

    text: str
    decided_by: str
    warning: str | None


def _describe(row: Any, hexagonal: bool) -> str:
    cell = "" if row.cell is None else f" {row.cell}"
    face = face_text(row.hkl, hexagonal)
    if len(row.terraces) > 1:
        parts = " and ".join(t.label for t in row.terraces)
        shares = "/".join(f"{f:.2f}" for f in row.fractions)
        return f"{face} with {parts} terraces (fractions {shares}){cell}"
    return f"{face} {row.termination.label}-terminated{cell}"


def _short(row: Any, hexagonal: bool) -> str:
    return f"{face_text(row.hkl, hexagonal)} {row.label}" + ("" if row.cell is None else f" {row.cell}")


def _rounded(values: Sequence[float], step: float) -> tuple[float, ...]:
    return tuple(sorted({round(v / step) * step for v in values if math.isfinite(v)}))


def same_predictions(a: Candidate, b: Candidate, *, labels: bool = True) -> bool:
    """True when two candidates predict the same topography: tilts, lattices and steps alike.

    With ``labels`` (the default) the terminations must also have the same
    composition: two terminations of one face that look alike in topography
    (La and B6 of LaB6 (001) with every species imaging alike) are still
    different answers, told apart by which species images.
    """
    if labels and sorted(c.label for c in a.classes) != sorted(c.label for c in b.classes):
        return False
    if a.cell != b.cell:
        return False
    if _rounded(a.tilts, 0.1) != _rounded(b.tilts, 0.1):
        return False
    la = [(round(x.a, 2), round(x.b, 2), round(x.gamma, 1)) for group in a.lattices for x in group]
    lb = [(round(x.a, 2), round(x.b, 2), round(x.gamma, 1)) for group in b.lattices for x in group]
    if sorted(map(str, la)) != sorted(map(str, lb)):
        return False
    return _rounded(a.step_heights, 0.01) == _rounded(b.step_heights, 0.01)


def separating_measurement(
    a: Candidate, b: Candidate, others: Sequence[Candidate] = (), hexagonal: bool = False
) -> str:
    """What to measure to tell candidate ``a`` from ``b``, in words.

    ``others`` are the remaining candidates: a mixed surface of the two
    terminations among them gives the step that joins their terraces.
    ``hexagonal``: faces are written (h k i l).
    """
    out = []
    if a.tilts and b.tilts:
        ta = min(a.tilts)
        gap = min(abs(x - y) for x in a.tilts for y in b.tilts)
        if gap > 3.0:
            tb = min(b.tilts, key=lambda y: abs(y - ta))
            out.append(f"the tilt ({ta:.1f}° against {tb:.1f}°)")
    la, lb = a.lattices[0][0], b.lattices[0][0]

    def lattice_text(x: Any) -> str:
        if not math.isfinite(x.a):
            return "flat"
        if not math.isfinite(x.b):
            return f"stripes {x.a:.2f} Å"
        return f"{x.a:.2f} × {x.b:.2f} Å, {x.gamma:.0f}°"

    if lattice_text(la) != lattice_text(lb):
        out.append(f"the corrugation lattice ({lattice_text(la)} against {lattice_text(lb)})")
    heights_a, heights_b = _rounded(a.step_heights, 0.01), _rounded(b.step_heights, 0.01)
    only = [h for h in heights_a if all(abs(h - g) > 0.02 * h for g in heights_b)]
    only_b = [h for h in heights_b if all(abs(h - g) > 0.02 * h for g in heights_a)]
    if a.hkl == b.hkl and a.classes != b.classes:
        ids = {m for members in a.members + b.members for m in members}
        cross = [
            h
            for c in (a, b, *others)
            if c.hkl == a.hkl and c.cell is None
            for h, lo, up in zip(c.step_heights, c.step_lower_id, c.step_upper_id)
            if lo in ids and up in ids and _class_of(c, lo) != _class_of(c, up)
        ]
        if cross:
            out.append(f"a step of {min(cross):.2f} Å between their terraces")
        if _elements(a) != _elements(b):
            out.append("which species images (STM contrast at both bias polarities; --visible)")
        else:
            out.append("the corrugation at atomic resolution (their tops differ in structure, not in species)")
    elif only or only_b:
        h, owner = (min(only), _short_c(a, hexagonal)) if only else (min(only_b), _short_c(b, hexagonal))
        out.append(f"a step of {h:.2f} Å (allowed on {owner} only)")
    return "; ".join(dict.fromkeys(out)) or "a second spacing or more step heights"


def _elements(c: Candidate) -> set[str]:
    """Chemical elements named in a candidate's termination labels."""
    return {el for ref in c.classes for el in re.findall(r"[A-Z][a-z]?", ref.label)}


def _class_of(c: Candidate, termination_id: str) -> int:
    return next(i for i, members in enumerate(c.members) if termination_id in members)


def _short_c(c: Candidate, hexagonal: bool) -> str:
    return f"{face_text(c.hkl, hexagonal)} {c.label}"


_TERM_NAMES = {"tilt": "the tilt", "lattice": "the corrugation lattice", "steps": "the step heights"}


def _decided_by(best: Any, runner: Any, default_visibility: bool, hexagonal: bool) -> str:
    diffs = {}
    for key in ("tilt", "lattice", "steps"):
        x, y = getattr(best.terms, key), getattr(runner.terms, key)
        if x is not None and y is not None:
            diffs[key] = (x if math.isfinite(x) else -1e300) - (y if math.isfinite(y) else -1e300)
    prior = best.terms.log_prior - runner.terms.log_prior
    if not diffs or max(diffs.values()) < 1.0:
        return f"prior only: the measurements cannot separate it from {_short(runner, hexagonal)}"
    key = max(diffs, key=lambda k: diffs[k])
    gain = diffs[key]
    text = f"{_TERM_NAMES[key]} (log-likelihood {gain:+.1f} over {_short(runner, hexagonal)}"
    text += f"; prior {prior:+.1f})" if abs(prior) >= 0.05 else ")"
    if key == "lattice" and default_visibility and best.hkl == runner.hkl:
        text += (
            "; it rests on the imaging assumption that every species images alike: check with --visible and --weight"
        )
    return text


def verdict(
    rows: Sequence[Any],
    candidates: Sequence[Candidate],
    faces: Sequence[Any],
    fit: FitCheck,
    n_candidates: int,
    *,
    default_visibility: bool,
    hexagonal: bool = False,
) -> Verdict:
    """The verdict of a ranking.

    Parameters
    ----------
    rows, candidates : sequences in rank order
        Scored rows (:class:`~termination.identification.likelihood.MatchRow`) and their candidates.
    faces : sequence of FaceProbability
    fit : FitCheck
        Of the best row.
    n_candidates : int
    default_visibility : bool
        Whether the imaging model is the default (every species alike).
    hexagonal : bool
        The crystal has hexagonal axes: faces are written (h k i l).
    """
    best, cbest = rows[0], candidates[0]
    twins = [r for r, c in zip(rows[1:], candidates[1:]) if same_predictions(cbest, c)]
    rival = next(((r, c) for r, c in zip(rows[1:], candidates[1:]) if not same_predictions(cbest, c)), (None, None))
    runner, crunner = rival
    face_p = next((f.probability for f in faces if f.hkl == best.hkl), best.probability)
    if fit.fits:
        text = (
            f"Most likely {_describe(best, hexagonal)}, probability {best.probability:.2f} among {n_candidates} "
            f"candidates; face {face_text(best.hkl, hexagonal)} with probability {face_p:.2f} over its terminations "
            "(a ranked hypothesis, not proof)."
        )
    else:
        text = (
            "No candidate explains the measurements within their uncertainties "
            f"(chi-square {fit.chi_square:.1f} for {fit.dof} values, p = {fit.p_value:.2g}; "
            f"{fit.step_outliers} step outliers, {fit.allowed_step_outliers} allowed). "
            f"Closest: {_describe(best, hexagonal)}. Likely causes: " + "; ".join(fit.causes) + "."
        )
    if twins:
        names = ", ".join(sorted({_short(r, hexagonal) for r in twins}))
        text += f" {names} predicts the same topography: these measurements cannot tell them apart."
    if runner is None:
        return Verdict(text, "only candidate with these predictions", None)
    decided = _decided_by(best, runner, default_visibility, hexagonal)
    warning = None
    if runner.probability > 0 and best.probability / runner.probability < 2.0:
        separate = separating_measurement(cbest, crunner, candidates, hexagonal)
        warning = (
            f"Ambiguous: the runner-up {_short(runner, hexagonal)} is within a factor of 2 "
            f"(p = {runner.probability:.2f}); to separate them measure {separate}."
        )
    return Verdict(text, decided, warning)
