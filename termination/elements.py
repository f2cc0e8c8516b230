"""Element symbols and the handling cautions attached to some of them."""

from .errors import StructureError

__all__ = ["SYMBOLS", "atomic_number", "check_symbol", "TOXIC", "handling_caution"]

SYMBOLS = (
    "X H He Li Be B C N O F Ne Na Mg Al Si P S Cl Ar K Ca Sc Ti V Cr Mn Fe Co Ni Cu "
    "Zn Ga Ge As Se Br Kr Rb Sr Y Zr Nb Mo Tc Ru Rh Pd Ag Cd In Sn Sb Te I Xe Cs Ba "
    "La Ce Pr Nd Pm Sm Eu Gd Tb Dy Ho Er Tm Yb Lu Hf Ta W Re Os Ir Pt Au Hg Tl Pb Bi "
    "Po At Rn Fr Ra Ac Th Pa U Np Pu Am Cm Bk Cf Es Fm Md No Lr Rf Db Sg Bh Hs Mt Ds "
    "Rg Cn Nh Fl Mc Lv Ts Og"
).split()

_NUMBER = {s: z for z, s in enumerate(SYMBOLS) if z > 0}

# Elements whose dust, vapour or compounds need special handling when a crystal
# is cleaved, polished or heated (common practice in surface-science labs).
TOXIC = {
    "As": "toxic (arsenic)",
    "Be": "toxic dust (beryllium)",
    "Cd": "toxic (cadmium)",
    "Hg": "toxic vapour (mercury)",
    "Pb": "toxic (lead)",
    "Tl": "highly toxic (thallium)",
    "Se": "toxic (selenium)",
    "Te": "toxic (tellurium)",
    "Sb": "toxic (antimony)",
    "Os": "forms volatile toxic OsO4",
    "Ba": "soluble compounds toxic (barium)",
    "Cr": "hexavalent compounds toxic (chromium)",
    "Ni": "sensitising, carcinogenic dust (nickel)",
    "Co": "sensitising, carcinogenic dust (cobalt)",
    "Th": "radioactive (thorium)",
    "U": "radioactive and toxic (uranium)",
    "Pu": "radioactive (plutonium)",
    "Po": "radioactive (polonium)",
    "Ra": "radioactive (radium)",
}


def atomic_number(symbol):
    """Atomic number of an element symbol.

    >>> atomic_number("Sn")
    50
    """
    try:
        return _NUMBER[symbol]
    except KeyError:
        raise StructureError(f"unknown element {symbol!r}") from None


def check_symbol(symbol):
    """Return ``symbol`` normalised ('na' -> 'Na'); raise StructureError if unknown."""
    text = str(symbol).strip()
    norm = text[:1].upper() + text[1:].lower()
    if norm not in _NUMBER:
        raise StructureError(f"unknown element {text!r}")
    return norm


def handling_caution(species):
    """One-line handling caution for the hazardous elements among ``species``.

    Returns None when none of the elements is listed in :data:`TOXIC`.

    >>> print(handling_caution(["Ga", "As"]))
    Caution: As toxic (arsenic). Cleave, polish and heat only under the lab's safety rules (fume hood, gloves, sealed waste).
    """
    found = sorted({s for s in species if s in TOXIC})
    if not found:
        return None
    items = "; ".join(f"{s} {TOXIC[s]}" for s in found)
    return (
        f"Caution: {items}. Cleave, polish and heat only under the lab's safety "
        "rules (fume hood, gloves, sealed waste)."
    )
