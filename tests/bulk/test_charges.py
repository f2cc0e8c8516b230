"""Formal charges: user options, file charges, the light guess and pymatgen's guess."""

import subprocess
import sys

import numpy as np
import pytest

from termination.bulk.charges import (
    COMMON_OXIDATION_STATES,
    METAL_CAUTION,
    assign_charges,
    is_metallic,
    light_guess,
    parse_charge_options,
)
from termination.errors import ChargeError


def test_parse_charge_options_accepts_decimals_and_fractions():
    assert parse_charge_options(["La=3", "B=-0.5"]) == {"La": 3.0, "B": -0.5}
    q = parse_charge_options(["ca=2", "B=-1/3"])
    assert q["Ca"] == 2.0 and q["B"] == pytest.approx(-1 / 3)


@pytest.mark.parametrize(
    "item, text",
    [("La3", "La3"), ("Zz=1", "Zz"), ("La=abc", "La=abc"), ("La=nan", "La=nan"), ("=3", "=3"), ("B=1/0", "B=1/0")],
)
def test_parse_charge_options_names_the_bad_item(item, text):
    with pytest.raises(ChargeError, match=text):
        parse_charge_options([item])


def test_parse_charge_options_rejects_duplicates():
    with pytest.raises(ChargeError, match="twice"):
        parse_charge_options(["La=3", "la=2"])


# Compounds whose textbook formal charges pymatgen's guess also gives
# (pymatgen Composition.oxi_state_guesses, first guess).
IONIC = [
    "NaCl",
    "MgO",
    "SrTiO3",
    "BaTiO3",
    "KTaO3",
    "CaF2",
    "BaF2",
    "Li2O",
    "CeO2",
    "GaAs",
    "InP",
    "ZnS",
    "CdTe",
    "CsCl",
    "NiO",
    "LaAlO3",
    "PbTiO3",
    "KBr",
    "LiF",
]


@pytest.mark.parametrize("formula", IONIC)
def test_light_guess_agrees_with_pymatgen_for_ionic_compounds(formula):
    from pymatgen.core import Composition

    comp = Composition(formula)
    species = [el.symbol for el, n in comp.items() for _ in range(int(n))]
    ours = light_guess(species)[0]
    theirs = comp.oxi_state_guesses()[0]  # pymatgen Composition.oxi_state_guesses
    assert {el: float(q) for el, q in ours.items()} == pytest.approx({str(k): v for k, v in theirs.items()})


def test_light_guess_cluster_anion_of_hexaborides():
    # The B6 cluster takes the metal's electrons (Zintl counting): LaB6 -> La3+ [B6]3-,
    # the example charges La=3, B=-0.5; CaB6 -> Ca2+ [B6]2-  # common practice
    la = light_guess(["La"] + ["B"] * 6)[0]
    ca = light_guess(["Ca"] + ["B"] * 6)[0]
    assert la == {"La": 3, "B": -0.5}
    assert ca["Ca"] == 2 and ca["B"] == pytest.approx(-1 / 3)


def test_light_guess_gives_up_on_intermetallics():
    # pymatgen's guess is empty for TiNiSn too (pymatgen Composition.oxi_state_guesses)
    from pymatgen.core import Composition

    assert light_guess(["Ti", "Ni", "Sn"]) is None
    assert Composition("TiNiSn").oxi_state_guesses() == ()


def test_light_guess_table_is_neutral_compatible():
    # every listed state is an integer within the physical range -4..+8  # common practice
    for el, states in COMMON_OXIDATION_STATES.items():
        assert states and all(-4 <= s <= 8 and s != 0 for s in states), el


def test_is_metallic():
    assert is_metallic(["Ti", "Ni", "Sn"]) and is_metallic(["Cu", "Cu", "Mn", "Al"])
    assert not is_metallic(["Sr", "Ti", "O"]) and not is_metallic(["Cu"])


def test_user_charges_with_one_element_solved(proto):
    c = proto("hexaboride:La,B")
    a = assign_charges(c, {"La": 2.5})
    assert a.source == "option" and a.charges["B"] == pytest.approx(-2.5 / 6)
    assert abs(a.per_atom.sum()) < 1e-12
    assert a.caution == METAL_CAUTION  # LaB6 is a metal


def test_user_charges_must_be_neutral(proto):
    c = proto("rocksalt:Na,Cl")
    with pytest.raises(ChargeError, match=r"not neutral.*\+1"):
        assign_charges(c, {"Na": 2, "Cl": -1})


def test_user_charges_small_residual_is_removed(proto):
    c = proto("hexaboride:La,B")
    a = assign_charges(c, {"La": 2.5, "B": -0.41667})
    assert abs(a.per_atom.sum()) < 1e-12 and a.charges["La"] == 2.5


@pytest.mark.parametrize(
    "charges, text",
    [({"Na": 1, "K": -1}, "K"), ({"Na": float("nan"), "Cl": -1}, "Na"), ({"Zz": 1}, "Zz")],
)
def test_user_charges_bad_values_name_them(proto, charges, text):
    with pytest.raises(ChargeError, match=text):
        assign_charges(proto("rocksalt:Na,Cl"), charges)


def test_two_missing_elements_are_an_error(proto):
    with pytest.raises(ChargeError, match="Ni, Sn"):
        assign_charges(proto("half-heusler:Ti,Ni,Sn"), {"Ti": 4})


def test_no_guess_for_an_intermetallic_says_so(proto):
    with pytest.raises(ChargeError, match="only a guide") as exc:
        assign_charges(proto("half-heusler:Ti,Ni,Sn"))
    assert "--charge" in str(exc.value)
    assert assign_charges(proto("half-heusler:Ti,Ni,Sn"), required=False) is None


def test_pymatgen_is_the_fallback(proto):
    c = proto("half-heusler:Ti,Co,Sb")
    from pymatgen.core import Composition

    expected = Composition("TiCoSb").oxi_state_guesses()[0]  # pymatgen Composition.oxi_state_guesses
    a = assign_charges(c)
    assert a.source == "pymatgen"
    assert a.charges == pytest.approx({str(k): v for k, v in expected.items()})
    assert assign_charges(c, use_pymatgen=False, required=False) is None


def test_charges_from_a_cif(tmp_path):
    from pymatgen.core import Lattice, Structure
    from pymatgen.io.cif import CifWriter

    from termination.structures import load_structure

    s = Structure.from_spacegroup("Fm-3m", Lattice.cubic(4.212), ["Mg", "O"], [[0, 0, 0], [0.5, 0.5, 0.5]])
    s.add_oxidation_state_by_element({"Mg": 2, "O": -2})
    path = tmp_path / "MgO.cif"
    CifWriter(s).write_file(str(path))  # pymatgen writes _atom_type_oxidation_number
    c = load_structure(str(path))
    a = assign_charges(c)
    assert a.source == "file" and a.charges == {"Mg": 2.0, "O": -2.0}
    assert assign_charges(c, {"Mg": 1, "O": -1}).source == "option"  # options win over the file


def test_elemental_crystal_is_uncharged(proto):
    a = assign_charges(proto("fcc:Cu"))
    assert a.charges == {"Cu": 0.0} and np.all(a.per_atom == 0)


def test_light_guess_does_not_import_pymatgen():
    code = (
        "import sys; from termination.structures import build_prototype; "
        "from termination.bulk.charges import assign_charges; "
        "a = assign_charges(build_prototype('perovskite:Sr,Ti,O'), use_pymatgen=False); "
        "print(a.text, 'pymatgen' in sys.modules)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.split()[-1] == "False" and "Ti +4" in out


# Tellurides whose metal is more electronegative than Te on Pauling's scale (Pb 2.33, W 2.36,
# Mo 2.16, Pt 2.28, Ir 2.20 against Te 2.1; pymatgen Element.X): the anion is still Te.
# Textbook formal charges, Greenwood and Earnshaw, Chemistry of the Elements (from memory).
TELLURIDES = [
    (["Pb", "Te"], {"Pb": 2, "Te": -2}),
    (["W", "Te", "Te"], {"W": 4, "Te": -2}),
    (["Mo", "Te", "Te"], {"Mo": 4, "Te": -2}),
    (["Pt", "Te", "Te"], {"Pt": 4, "Te": -2}),
    (["Ir", "Te", "Te"], {"Ir": 4, "Te": -2}),
]


@pytest.mark.parametrize("species, expected", TELLURIDES)
def test_anions_come_from_the_anion_formers_not_the_electronegativity_order(species, expected):
    from termination.bulk.elements import electronegativity

    assert electronegativity(species[0]) > electronegativity("Te")  # the case the strict order got wrong
    guess, how = light_guess(species)
    assert guess == expected and "anion formers" in how


def test_pbte_prototype_gets_a_polar_column(proto):
    a = assign_charges(proto("rocksalt:Pb,Te"), use_pymatgen=False)
    assert a.source == "guess" and a.charges == {"Pb": 2.0, "Te": -2.0}


def _ase_crystal(symbols, basis, spacegroup, cellpar):
    from ase.spacegroup import crystal

    from termination.bulk.crystal import build_crystal

    at = crystal(symbols, basis, spacegroup=spacegroup, cellpar=cellpar)  # ASE builds the orbits
    return build_crystal(at.cell[:], at.get_scaled_positions(), at.get_chemical_symbols())


def test_pyrite_is_iron_two_with_disulfide_dimers():
    # FeS2 pyrite, Pa-3, a = 5.417 Å, S at 8c x = 0.385 (from memory): Fe(II) and S2 2- dimers
    # (Greenwood and Earnshaw), not pymatgen's first guess Fe +3, S -1.5.
    c = _ase_crystal(["Fe", "S"], [(0, 0, 0), (0.385, 0.385, 0.385)], 205, [5.417] * 3 + [90] * 3)
    a = assign_charges(c, use_pymatgen=False)
    assert a.charges == {"Fe": 2.0, "S": -1.0}
    assert "polyanion rule" in a.method and "S2²⁻ dimers" in a.method and "8 - N" in a.method


def test_peroxide_dimers_are_o2_two_minus():
    # BaO2 (CaC2 type, I4/mmm), a = 3.807, c = 6.826 Å, O at 4e z = 0.3892: O-O 1.51 Å (from memory).
    c = _ase_crystal(["Ba", "O"], [(0, 0, 0), (0, 0, 0.3892)], 139, [3.807, 3.807, 6.826, 90, 90, 90])
    a = assign_charges(c, use_pymatgen=False)
    assert a.charges == {"Ba": 2.0, "O": -1.0} and "O2²⁻ dimers" in a.method


def test_oxides_without_o_o_bonds_keep_the_plain_rule(proto):
    for spec in ("rutile:Ti,O", "corundum:Al,O", "perovskite:Sr,Ti,O"):
        a = assign_charges(proto(spec), use_pymatgen=False)
        assert "polyanion" not in a.method and a.charges["O"] == -2.0, spec
