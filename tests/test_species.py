"""Parsing carbocations, adducts and heterolysis fragments from SMILES (no quantum chemistry)."""

import pytest

from cationcalc.chem.species import InputError, carbocation, heterolysis_fragments, hydride_adduct, species


@pytest.mark.parametrize("onium, carbenium", [
    ("C=[O+]C", "[CH2+]OC"),            # methoxymethyl: oxocarbenium and carbenium spellings
    ("C=[N+](C)C", "[CH2+]N(C)C"),      # iminium
    ("CC#[O+]", "C[C+]=O"),             # acylium
    ("c1ccccc1C=[O+]C", "CO[CH+]c1ccccc1"),
])
def test_onium_spellings_map_to_the_same_carbenium_species(onium, carbenium):
    # resonance forms of one ion must give one species (common practice, no source)
    assert carbocation(onium) == carbocation(carbenium)


@pytest.mark.parametrize("smiles, adduct", [
    ("C[C+](C)C", "CC(C)C"),
    ("[CH2+]c1ccccc1", "Cc1ccccc1"),
    ("C1=CC=C[CH+]C=C1", "C1=CCC=CC=C1"),
    ("[cH+]1cccccc1", "C1=CCC=CC=C1"),
    ("CC(C)=[CH+]", "C=C(C)C"),
    ("C=C[CH2+]", "C=CC"),
])
def test_hydride_adds_to_the_cationic_carbon(smiles, adduct):
    assert hydride_adduct(carbocation(smiles)).smiles == species(adduct).smiles


def test_nitro_groups_do_not_count_as_a_second_charge():
    cation = carbocation("O=[N+]([O-])c1ccc([CH2+])cc1")
    assert hydride_adduct(cation).smiles == species("Cc1ccc([N+](=O)[O-])cc1").smiles


@pytest.mark.parametrize("bad, words", [
    ("xx", "not a valid SMILES"),
    ("", "empty input"),
    ("CC", "not a monocation"),
    ("C[C]C", "radical"),
    ("C[C+]([CH2+])C", "net charge +2"),
    ("C.C", "disconnected"),
    ("C[Xe+]", "does not handle"),
    ("C[N+](C)(C)C", "no carbenium resonance form"),
])
def test_bad_cations_give_one_line_errors(bad, words):
    with pytest.raises(InputError) as info:
        carbocation(bad)
    message = str(info.value)
    assert words in message and "\n" not in message


def test_size_limit_needs_force():
    big = "C" * 130 + "[CH2+]"
    with pytest.raises(InputError, match="--force"):
        carbocation(big)
    assert carbocation(big, force=True).charge == 1


def test_heterolysis_fragments_and_leaving_group_choice():
    h = heterolysis_fragments("CC(C)(C)Cl")
    assert (h.cation.smiles, h.leaving_group.smiles, h.leaving_group_name) == ("C[C+](C)C", "[Cl-]", "chloride")
    with pytest.raises(InputError, match="atom map"):
        heterolysis_fragments("ClCCBr")
    picked = heterolysis_fragments("ClCC[Br:1]")
    assert picked.leaving_group.smiles == "[Br-]" and picked.cation.smiles == "[CH2+]CCl"
    with pytest.raises(InputError, match="no carbon–halogen bond"):
        heterolysis_fragments("CCO")
