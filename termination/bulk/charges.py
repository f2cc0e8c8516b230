"""Formal charges (oxidation states) of a crystal, for the polar-surface check.

Charges come, in this order, from

1. the user (``{"La": 3, "B": -0.5}``; at most one element may be left out, it
   is then solved for neutrality),
2. the structure file (CIF oxidation states, :attr:`Crystal.charges`),
3. a light guess in pure Python: homonuclear polyanions found in the bond
   graph counted by the 8 - N rule (:func:`polyanion_guess`: S2 in pyrite,
   O2 in peroxides), else a small table of common oxidation states solved for
   neutrality with anions decided by the anion-forming elements, and a
   cluster-anion rule for borides and similar compounds (:func:`light_guess`),
4. pymatgen's oxidation-state guess (``Composition.oxi_state_guesses``),
   imported only when the light guess finds nothing and the caller allows it.

Every assignment is checked for charge neutrality.  A residual within the
tolerance is removed by scaling the negative charges, so that dipoles of
repeat units do not depend on the origin.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from fractions import Fraction
from itertools import product
from typing import Literal, overload

import numpy as np

from termination.arrays import FloatArray, IntArray
from termination.bulk.bonds import bond_graph
from termination.bulk.crystal import Crystal
from termination.bulk.elements import (
    check_symbol,
    count_species,
    covalent_radius,
    electronegativity,
    parse_element_values,
)
from termination.bulk.neighbours import neighbour_pairs
from termination.defaults import BOND_FACTOR, MAX_CHARGE_E, NEUTRALITY_TOL_E, RELATIVE_EPS
from termination.errors import ChargeError
from termination.units import E

__all__ = [
    "ANION_FORMERS",
    "COMMON_OXIDATION_STATES",
    "METAL_CAUTION",
    "POLYANION_VALENCE",
    "ChargeAssignment",
    "assign_charges",
    "is_metallic",
    "light_guess",
    "parse_charge_options",
    "polyanion_guess",
    "pymatgen_guess",
    "with_formal_charges",
]

# Common oxidation states, most common first (from memory of N. N. Greenwood and
# A. Earnshaw, Chemistry of the Elements, 2nd ed. (1997)).  Kept short on purpose:
# the light guess should find the textbook assignment of an ionic compound and
# nothing exotic.
_STATES_TEXT = """
H 1 -1; Li 1; Be 2; B 3; C 4 -4; N -3 3 5; O -2; F -1
Na 1; Mg 2; Al 3; Si 4 -4; P 5 -3 3; S -2 6 4; Cl -1 7 5
K 1; Ca 2; Sc 3; Ti 4 3 2; V 5 4 3; Cr 3 6 2; Mn 2 4 3; Fe 3 2; Co 2 3; Ni 2 3; Cu 2 1; Zn 2
Ga 3 1; Ge 4 2 -4; As -3 3 5; Se -2 4 6; Br -1 5
Rb 1; Sr 2; Y 3; Zr 4; Nb 5 3; Mo 6 4; Tc 7 4; Ru 3 4; Rh 3; Pd 2 4; Ag 1; Cd 2
In 3 1; Sn 4 2 -4; Sb -3 3 5; Te -2 4 6; I -1 5 7
Cs 1; Ba 2; La 3; Ce 3 4; Pr 3 4; Nd 3; Pm 3; Sm 3 2; Eu 3 2; Gd 3; Tb 3 4; Dy 3; Ho 3; Er 3
Tm 3; Yb 3 2; Lu 3; Hf 4; Ta 5; W 6 4; Re 7 4; Os 4; Ir 4 3; Pt 2 4; Au 3 1; Hg 2 1; Tl 1 3
Pb 2 4; Bi 3 5 -3; Th 4; U 6 4
"""


def _parse_states(text: str) -> dict[str, tuple[int, ...]]:
    """Element -> oxidation states from 'EL s1 s2; EL s1 ...' lines."""
    table: dict[str, tuple[int, ...]] = {}
    for item in re.split(r"[;\n]", text):
        parts = item.split()
        if parts:
            table[parts[0]] = tuple(int(v) for v in parts[1:])
    return table


#: Common oxidation states per element, most common first.
COMMON_OXIDATION_STATES = _parse_states(_STATES_TEXT)

#: Elements that make a compound ionic or covalent enough for formal charges to
#: be more than a bookkeeping device (common practice); a compound with none of
#: them is treated as a metal or intermetallic.
ANION_FORMERS = frozenset("H C N O F P S Cl As Se Br Sb Te I".split())

# Elements that may carry the balancing charge of a cluster anion (B6 in MB6,
# C2 in carbides, Si in silicides): the light guess's last resort.
_CLUSTER_FORMERS = frozenset("B C Si Ge".split())

#: Caution printed for metals and intermetallics.
METAL_CAUTION = (
    "metal or intermetallic: conduction electrons screen layer charges, so the "
    "electrostatic (Tasker) picture is only a guide here"
)


@dataclass(frozen=True, eq=False)
class ChargeAssignment:
    """Formal charges used for a crystal.

    Attributes
    ----------
    charges : dict of str to float
        Charge per element in units of e (mean over sites when the file gives
        site-resolved values), in order of first appearance.
    source : str
        'option' (given by the user), 'file' (from the structure file),
        'guess' (light guess from common oxidation states) or 'pymatgen'
        (pymatgen's oxidation-state guess).
    method : str
        One sentence on how the charges were obtained.
    caution : str or None
        :data:`METAL_CAUTION` for metals and intermetallics, a note for
        elemental crystals, else None.
    per_atom : (N,) FloatArray
        Charge per atom of the conventional cell (units of e), exactly neutral.
    """

    charges: dict[str, float] = field(metadata=E)
    source: str
    method: str
    caution: str | None
    per_atom: FloatArray = field(repr=False, metadata=E)

    @property
    def text(self) -> str:
        """'La +3, B -0.5' style summary."""
        return ", ".join(f"{el} {_format_charge(q)}" for el, q in self.charges.items())


def _format_charge(q: float) -> str:
    """'+3', '-0.5' or '-1/3': thirds, sixths, ... as fractions, other charges as decimals."""
    f = Fraction(q).limit_denominator(12)
    if abs(float(f) - q) < RELATIVE_EPS and f.denominator > 1 and f.denominator not in (2, 4, 5):
        return f"{'+' if f > 0 else '-'}{abs(f.numerator)}/{f.denominator}"
    return f"{q:+g}"


def parse_charge_options(items: Iterable[str] | None) -> dict[str, float]:
    """Charges per element from ``EL=Q`` strings.

    Parameters
    ----------
    items : sequence of str
        E.g. ``["La=3", "B=-0.5"]``; fractions such as ``B=-1/3`` are allowed.

    Returns
    -------
    dict
        Element -> charge (e).

    Examples
    --------
    >>> parse_charge_options(["La=3", "B=-1/2"])
    {'La': 3.0, 'B': -0.5}
    """
    return parse_element_values(items, "--charge", ChargeError)


def is_metallic(species: Iterable[str]) -> bool:
    """True when a compound of several elements has no anion former (an intermetallic).

    >>> is_metallic(["Ti", "Ni", "Sn"]), is_metallic(["Ga", "As"]), is_metallic(["La", "B"])
    (True, False, True)
    """
    elements = set(species)
    return len(elements) > 1 and not (elements & ANION_FORMERS)


def _solve(elements: Sequence[str], counts: IntArray, fixed: float = 0.0) -> tuple[int, dict[str, float]] | None:
    """The most common integer states of ``elements`` (``counts`` atoms each) that cancel ``fixed`` (e).

    Returns (score, states) or None; see :func:`light_guess` for the rules.
    """
    chi = np.array([electronegativity(el) for el in elements])
    may_be_anion = np.array([el in ANION_FORMERS or el in _CLUSTER_FORMERS for el in elements])
    former = np.array([el in ANION_FORMERS for el in elements])
    best: tuple[int, IntArray] | None = None
    for ranks in product(*(range(len(COMMON_OXIDATION_STATES[el])) for el in elements)):
        states = np.array([COMMON_OXIDATION_STATES[el][r] for el, r in zip(elements, ranks)])
        if abs(float(counts @ states) + fixed) > RELATIVE_EPS:
            continue
        neg, pos = states < 0, states > 0
        if not pos.any() or not (neg.any() or fixed < 0):
            continue
        # Anions are anion formers; among formers, every negative one is more electronegative
        # than every positive one (S +6 and O -2 in a sulfate; never Pb below Te).
        if np.any(neg & ~may_be_anion):
            continue
        if (neg & former).any() and (pos & former).any() and chi[neg & former].min() <= chi[pos & former].max():
            continue
        score = sum(ranks)
        if best is None or score < best[0]:
            best = (score, states)
    if best is None:
        return None
    return best[0], {el: int(q) for el, q in zip(elements, best[1])}


def light_guess(species: Iterable[str]) -> tuple[dict[str, float], str] | None:
    """Formal charges from common oxidation states solved for neutrality (pure Python).

    Parameters
    ----------
    species : sequence of str
        Element per atom (any cell; only the ratios matter).

    Returns
    -------
    (dict, str) or None
        Element -> charge and a sentence saying how it was found, or None when
        there is no guess (pure metals and intermetallics without an anion
        former, unknown elements, no neutral combination).

    Notes
    -----
    With n_e atoms of element e and candidate states s_e from
    :data:`COMMON_OXIDATION_STATES`, every combination with

    - sum_e n_e s_e = 0,
    - negative states only on anion formers (:data:`ANION_FORMERS`; B, C, Si
      and Ge as cluster formers),
    - among the anion formers, every negative one more electronegative than
      every positive one,

    is scored by the sum of the states' ranks in the table (0 = most common);
    the lowest score wins, ties go to the earlier combination.  Deciding
    anions by the anion formers rather than by a strict electronegativity
    order gives the tellurides whose metal is more electronegative than Te on
    Pauling's scale their textbook charges (PbTe: Pb +2, Te -2).  When no
    integer combination exists and the most electronegative element is a
    cluster former (B, C, Si, Ge), it takes the balancing charge
    q = -sum_others n_e s_e / n, the others at their most common state: the
    cluster-anion (Zintl) count, e.g. LaB6 -> La +3, B -1/2 ([B6]3-).

    An elemental crystal gets charge 0 everywhere.

    Examples
    --------
    >>> light_guess(["Sr", "Ti", "O", "O", "O"])[0]
    {'Sr': 2, 'Ti': 4, 'O': -2}
    >>> light_guess(["La"] + ["B"] * 6)[0]
    {'La': 3, 'B': -0.5}
    >>> light_guess(["Pb", "Te"])[0]
    {'Pb': 2, 'Te': -2}
    """
    comp = count_species(species)
    elements = list(comp)
    if len(elements) == 1:
        return {elements[0]: 0}, "elemental crystal: all charges are zero"
    if not set(elements) & (ANION_FORMERS | _CLUSTER_FORMERS):
        return None
    if any(el not in COMMON_OXIDATION_STATES for el in elements):
        return None
    counts = np.array([comp[el] for el in elements])
    found = _solve(elements, counts)
    if found is not None:
        integral: dict[str, float] = dict(found[1])
        return integral, "common oxidation states solved for neutrality, anions from the anion formers"
    anion = max(elements, key=lambda el: (electronegativity(el), el))
    if anion not in _CLUSTER_FORMERS:
        return None
    others = [el for el in elements if el != anion]
    first = {el: COMMON_OXIDATION_STATES[el][0] for el in others}
    if any(first[el] <= 0 for el in others):
        return None
    q = -sum(comp[el] * first[el] for el in others) / comp[anion]
    if not (-4 <= q < 0):
        return None
    cluster: dict[str, float] = {el: (first[el] if el != anion else q) for el in elements}
    return cluster, f"common oxidation states, {anion} balancing as a cluster anion"


#: Valence electrons of the elements that form homonuclear polyanions (main-group count N).
POLYANION_VALENCE: dict[str, int] = {"O": 6, "S": 6, "Se": 6, "Te": 6, "P": 5, "As": 5, "Sb": 5}

_SUPERSCRIPT = str.maketrans("0123456789+-", "⁰¹²³⁴⁵⁶⁷⁸⁹⁺⁻")


def polyanion_guess(crystal: Crystal) -> tuple[FloatArray, str] | None:
    """Formal charges of a crystal with homonuclear polyanions (S2, O2, Se2, P-P, ...) found in its bond graph.

    Parameters
    ----------
    crystal : Crystal

    Returns
    -------
    ((N,) FloatArray, str) or None
        Charge per atom and a sentence naming the units and the rule; None
        when the bond graph (default rule) has no bond between two atoms of
        one polyanion former (:data:`POLYANION_VALENCE`), or no neutral
        assignment follows.

    Notes
    -----
    An atom of a polyanion former with valence-electron count N and b bonds
    to atoms of its own element carries -(8 - N - b), the 8 - N rule of
    Zintl and Klemm (common practice): each S of a pyrite S2 dimer -1 (S2
    2-), each O of a peroxide -1, each P of a P4 ring of a skutterudite -1.
    The other atoms take common oxidation states solved for neutrality by the
    rules of :func:`light_guess`.  B6 clusters and C2 units keep the
    cluster-anion rule of :func:`light_guess` (their bonds are not single).

    References
    ----------
    N. N. Greenwood and A. Earnshaw, Chemistry of the Elements, 2nd ed. (1997)
    (FeS2: Fe(II) and S2 2-).
    """
    species = crystal.species
    if any(el not in COMMON_OXIDATION_STATES for el in set(species)):
        return None
    # Most crystals have no two atoms of a polyanion former within bonding distance: a search
    # among those atoms alone says so without the whole bond graph.
    names = np.array(species)
    close = False
    for el in set(species) & set(POLYANION_VALENCE):
        reach = BOND_FACTOR * 2 * covalent_radius(el)
        close = close or len(neighbour_pairs(crystal.lattice, crystal.positions[names == el], reach)) > 0
    if not close:
        return None
    graph = bond_graph(crystal)
    src, tgt = graph.source, graph.target
    same = np.array([species[i] == species[j] and species[i] in POLYANION_VALENCE for i, j in zip(src, tgt)])
    if not same.any():
        return None
    homonuclear = np.bincount(src[same], minlength=crystal.natoms)
    per_atom = np.zeros(crystal.natoms)
    in_unit = np.zeros(crystal.natoms, dtype=bool)
    described: dict[str, set[int]] = {}
    for i, b in enumerate(homonuclear):
        if b == 0:
            continue
        q = -(8 - POLYANION_VALENCE[species[i]] - int(b))
        if q >= 0:
            continue
        per_atom[i] = q
        in_unit[i] = True
        described.setdefault(species[i], set()).add(int(b))
    if not in_unit.any():
        return None
    rest = [s for s, u in zip(species, in_unit) if not u]
    comp = count_species(rest)
    elements = list(comp)
    fixed = float(per_atom[in_unit].sum())
    if elements:
        found = _solve(elements, np.array([comp[el] for el in elements]), fixed)
        if found is None:
            return None
        for i, s in enumerate(species):
            if not in_unit[i]:
                per_atom[i] = found[1][s]
    elif abs(fixed) > RELATIVE_EPS:
        return None
    units = []
    for el, bonds in described.items():
        if bonds == {1}:
            charge = 2 * (8 - POLYANION_VALENCE[el] - 1)
            units.append(f"{el}2{(str(charge) + '-').translate(_SUPERSCRIPT)} dimers")
        else:
            counts_text = "/".join(str(b) for b in sorted(bonds))
            units.append(f"{el} with {counts_text} {el}-{el} bonds")
    how = (
        "polyanion rule: " + ", ".join(units) + " from the bond graph, each atom -(8 - N - b) for b bonds to its "
        "own element (8 - N rule)"
    )
    if elements:
        how += "; " + ", ".join(elements) + " from common oxidation states solved for neutrality"
    return per_atom, how


def pymatgen_guess(species: Iterable[str]) -> dict[str, float] | None:
    """pymatgen's first oxidation-state guess (``Composition.oxi_state_guesses``), or None.

    pymatgen is imported here, only when this function runs.
    """
    from pymatgen.core.composition import Composition

    comp = count_species(species)
    try:
        guesses = Composition(comp).oxi_state_guesses()
    except Exception:  # pymatgen raises on exotic compositions
        return None
    if not guesses:
        return None
    guess = guesses[0]
    return {el: float(guess.get(el, 0.0)) for el in comp}


def _neutralise(per_atom: FloatArray, species: Sequence[str], tol: float, what: str) -> FloatArray:
    """(N,) charges made exactly neutral by scaling the negative ones; ChargeError beyond ``tol`` e per formula unit.

    Charges beyond ±MAX_CHARGE_E (a file's, or one solved for neutrality) are
    refused too: no oxidation state comes near, and huge ones overflow the
    electrostatic sums.
    """
    comp = count_species(species)
    if not np.all(np.isfinite(per_atom)) or np.abs(per_atom).max(initial=0.0) > MAX_CHARGE_E:
        i = int(np.argmax(np.where(np.isfinite(per_atom), np.abs(per_atom), np.inf)))
        raise ChargeError(
            f"{what} charge of {species[i]} must lie within ±{MAX_CHARGE_E:g} e (MAX_CHARGE_E), "
            f"got {_format_charge(float(per_atom[i])) if np.isfinite(per_atom[i]) else per_atom[i]}"
        )
    total = float(per_atom.sum())
    formula_units = math.gcd(*comp.values())
    if abs(total) / formula_units > tol:
        parts = ", ".join(f"{el}={_format_charge(float(np.mean(per_atom[[s == el for s in species]])))}" for el in comp)
        raise ChargeError(
            f"{what} charges {parts} are not neutral: they sum to {total / formula_units:+.4g} e per formula unit"
        )
    neg = per_atom < 0
    if neg.any() and abs(total) > 0:
        pos_sum = per_atom[~neg].sum()
        per_atom = per_atom.copy()
        per_atom[neg] *= pos_sum / -per_atom[neg].sum()
    return per_atom


def _by_element(per_atom: FloatArray, species: Sequence[str]) -> dict[str, float]:
    """Mean charge per element, in order of first appearance."""
    out: dict[str, float] = {}
    for el in dict.fromkeys(species):
        vals = per_atom[[s == el for s in species]]
        out[el] = float(np.mean(vals))
    return out


def _caution(species: Sequence[str]) -> str | None:
    if len(set(species)) == 1:
        return "elemental crystal: no layer carries a charge"
    return METAL_CAUTION if is_metallic(species) else None


@overload
def assign_charges(
    crystal: Crystal,
    charges: Mapping[str, float] | None = ...,
    *,
    use_pymatgen: bool = ...,
    neutrality_tol_e: float = ...,
    required: Literal[True] = ...,
) -> ChargeAssignment: ...


@overload
def assign_charges(
    crystal: Crystal,
    charges: Mapping[str, float] | None = ...,
    *,
    use_pymatgen: bool = ...,
    neutrality_tol_e: float = ...,
    required: bool,
) -> ChargeAssignment | None: ...


def assign_charges(
    crystal: Crystal,
    charges: Mapping[str, float] | None = None,
    *,
    use_pymatgen: bool = True,
    neutrality_tol_e: float = NEUTRALITY_TOL_E,
    required: bool = True,
) -> ChargeAssignment | None:
    """Formal charges of ``crystal`` from the user, the file or a guess.

    Parameters
    ----------
    crystal : Crystal
    charges : mapping, optional
        Element -> charge (e) given by the user.  All elements of the crystal
        but at most one must appear; a missing one is solved for neutrality.
    use_pymatgen : bool
        Fall back on pymatgen's oxidation-state guess when the light guess
        finds nothing (imports pymatgen).
    neutrality_tol_e : float
        Largest accepted net charge per formula unit, e.  The residual is
        removed by scaling the negative charges.
    required : bool
        If False, return None instead of raising when no charges can be found.

    Returns
    -------
    ChargeAssignment or None

    Raises
    ------
    ChargeError
        Bad or non-neutral charges, an element given that is not in the
        crystal, or no guess (when ``required``).
    """
    tol = float(neutrality_tol_e)
    if not (math.isfinite(tol) and tol >= 0):
        raise ChargeError(f"neutrality tolerance must be a non-negative charge in e, got {neutrality_tol_e}")
    species = crystal.species
    elements = list(dict.fromkeys(species))
    comp = count_species(species)
    caution = _caution(species)
    if charges:
        given: dict[str, float] = {}
        for el, q in dict(charges).items():
            try:
                symbol = check_symbol(el)
            except Exception:
                raise ChargeError(f"charge given for unknown element {el!r}") from None
            try:
                value = float(q)
            except (TypeError, ValueError):
                raise ChargeError(f"charge of {el} must be a number, got {q!r}") from None
            if not math.isfinite(value):
                raise ChargeError(f"charge of {el} must be finite, got {q!r}")
            if abs(value) > MAX_CHARGE_E:
                raise ChargeError(f"charge of {el} must lie within ±{MAX_CHARGE_E:g} e (MAX_CHARGE_E), got {q!r}")
            if symbol not in comp:
                raise ChargeError(
                    f"charge given for {symbol}, which is not in {crystal.formula} ({', '.join(elements)})"
                )
            given[symbol] = value
        missing = [el for el in elements if el not in given]
        method = "given"
        if len(missing) > 1:
            raise ChargeError(
                f"no charge for {', '.join(missing)}: give --charge EL=Q for all elements but at most one"
            )
        if missing:
            el = missing[0]
            given[el] = -sum(comp[e] * q for e, q in given.items()) / comp[el]
            method = f"given; {el} {_format_charge(given[el])} solved for neutrality"
        per_atom = np.array([given[s] for s in species], dtype=float)
        per_atom = _neutralise(per_atom, species, tol, "given")
        return ChargeAssignment(_by_element(per_atom, species), "option", method, caution, per_atom)
    if crystal.charges is not None:
        per_atom = _neutralise(np.asarray(crystal.charges, dtype=float), species, tol, "file")
        return ChargeAssignment(
            _by_element(per_atom, species), "file", "oxidation states from the structure file", caution, per_atom
        )
    units = polyanion_guess(crystal)
    if units is not None:
        per_atom = _neutralise(units[0], species, tol, "guessed")
        return ChargeAssignment(_by_element(per_atom, species), "guess", f"guessed: {units[1]}", caution, per_atom)
    guess = light_guess(species)
    if guess is not None:
        values, how = guess
        per_atom = np.array([float(values[s]) for s in species])
        per_atom = _neutralise(per_atom, species, tol, "guessed")
        return ChargeAssignment(_by_element(per_atom, species), "guess", f"guessed: {how}", caution, per_atom)
    if use_pymatgen:
        found = pymatgen_guess(species)
        if found is not None:
            per_atom = np.array([found[s] for s in species], dtype=float)
            per_atom = _neutralise(per_atom, species, tol, "guessed")
            return ChargeAssignment(
                _by_element(per_atom, species),
                "pymatgen",
                "guessed by pymatgen (Composition.oxi_state_guesses)",
                caution,
                per_atom,
            )
    if not required:
        return None
    hint = f" ({METAL_CAUTION})" if is_metallic(species) else ""
    raise ChargeError(
        f"no oxidation-state guess for {crystal.formula}: give --charge EL=Q for its elements "
        f"({', '.join(elements)}){hint}"
    )


@overload
def with_formal_charges(
    crystal: Crystal,
    charges: Mapping[str, float] | None = ...,
    *,
    use_pymatgen: bool = ...,
    required: Literal[True],
) -> tuple[Crystal, ChargeAssignment]: ...


@overload
def with_formal_charges(
    crystal: Crystal,
    charges: Mapping[str, float] | None = ...,
    *,
    use_pymatgen: bool = ...,
    required: bool = ...,
) -> tuple[Crystal, ChargeAssignment | None]: ...


def with_formal_charges(
    crystal: Crystal,
    charges: Mapping[str, float] | None = None,
    *,
    use_pymatgen: bool = False,
    required: bool = False,
) -> tuple[Crystal, ChargeAssignment | None]:
    """The crystal with formal charges on its atoms, and how they were found.

    The one path every command takes to charges: :func:`assign_charges`
    (user, file, light guess, then pymatgen only when ``use_pymatgen``),
    then :meth:`Crystal.with_charges`.

    Parameters
    ----------
    crystal : Crystal
    charges : mapping, optional
        Element -> charge given by the user.
    use_pymatgen : bool
        Allow pymatgen's oxidation-state guess as the last resort (slow to import).
    required : bool
        Raise :class:`ChargeError` when no charges are found; otherwise return
        the crystal unchanged with None.

    Returns
    -------
    (Crystal, ChargeAssignment or None)
    """
    found = assign_charges(crystal, charges, use_pymatgen=use_pymatgen, required=required or bool(charges))
    if found is None:
        return crystal, None
    return crystal.with_charges(found.per_atom), found
