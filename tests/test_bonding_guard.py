"""The bonding guard: cations that do not stay what they were drawn as are caught and said.

At GFN2-xTB 1-propyl relaxes to 2-propyl (1,2-H shift) and cyclobutylmethyl
ring-expands to cyclopentyl; 2-norbornyl relaxes to its bridged
(nonclassical) structure.  (2-Butyl stays open in every one of 14 conformers
tried here at GFN2-xTB, so the bridged branch is checked on 2-norbornyl.)
"""

from cationcalc.compute.pipeline import compute_species
from cationcalc.chem.species import Species, carbocation


def _cation(smiles):
    c = carbocation(smiles)
    return Species(c.smiles, 1, 1)


def test_1_propyl_becomes_2_propyl(gas):
    result = compute_species(_cation("CC[CH2+]"), gas)
    assert result.rearranged
    assert result.relaxed_smiles == "C[CH+]C"
    assert "formed C0-H" in result.bonding_change and "broke C1-H" in result.bonding_change
    assert any("belong to the relaxed structure" in w for w in result.warnings)


def test_cyclobutylmethyl_ring_expansion_is_caught(gas):
    result = compute_species(_cation("[CH2+]C1CCC1"), gas)
    text = " ".join(result.warnings) + result.bonding_change
    # either some conformers ring-expanded and were set aside, or all did and the value is cyclopentyl's
    assert "[CH+]1CCCC1" in text
    assert any(c.bonding_changed for c in result.conformers) or result.rearranged


def test_2_norbornyl_bridges(gas):
    result = compute_species(_cation("[CH+]1CC2CCC1C2"), gas)
    assert result.rearranged
    assert "bridged" in result.bonding_change


def test_stable_cations_are_left_alone(gas):
    for smiles in ("C[C+](C)C", "[CH2+]c1ccccc1", "C1=CC=C[CH+]C=C1"):
        result = compute_species(_cation(smiles), gas)
        assert not result.rearranged and not any(c.bonding_changed for c in result.conformers), smiles
