"""Fuzzing: random small carbocations never crash the tool, every input ends as a value or a clean error.

The strategy builds random RDKit molecules of up to six heavy atoms (C, N, O,
S, F, Cl, Br; single, double and triple bonds; rings), puts the positive
charge on one carbon with the hydrogens a carbenium carbon has, and keeps
only what RDKit can sanitize.  Parsing and species preparation are fuzzed
with many examples; the full GFN2-xTB pipeline with a few (more under
``-m slow``).  Arbitrary text is fuzzed through the same entry points.
"""

import math

import pytest
from hypothesis import HealthCheck, assume, given, settings, strategies as st
from rdkit import Chem, RDLogger

from cationcalc.chem.conformers import ConformerSettings
from cationcalc.compute.models import Settings
from cationcalc.chem.species import InputError, carbocation, hydride_adduct
from cationcalc.tasks.runner import run_task

RDLogger.DisableLog("rdApp.*")

ELEMENTS = ["C", "C", "C", "C", "N", "O", "S", "F", "Cl", "Br"]
BONDS = [Chem.BondType.SINGLE] * 4 + [Chem.BondType.DOUBLE, Chem.BondType.TRIPLE]


@st.composite
def carbocation_smiles(draw, max_heavy: int = 6):
    """A sanitizable SMILES with one carbon carrying +1 and at most three bonds' worth of valence."""
    n = draw(st.integers(1, max_heavy))
    elements = ["C"] + [draw(st.sampled_from(ELEMENTS)) for _ in range(n - 1)]
    mol = Chem.RWMol()
    for symbol in elements:
        mol.AddAtom(Chem.Atom(symbol))
    for i in range(1, n):  # a random tree ...
        mol.AddBond(draw(st.integers(0, i - 1)), i, draw(st.sampled_from(BONDS)))
    if n >= 3 and draw(st.booleans()):  # ... and sometimes a ring closure
        a, b = draw(st.integers(0, n - 1)), draw(st.integers(0, n - 1))
        if a != b and mol.GetBondBetweenAtoms(a, b) is None:
            mol.AddBond(a, b, Chem.BondType.SINGLE)
    centre = draw(st.sampled_from([i for i, s in enumerate(elements) if s == "C"]))
    atom = mol.GetAtomWithIdx(centre)
    valence = sum(b.GetBondTypeAsDouble() for b in atom.GetBonds())
    assume(valence <= 3)
    atom.SetFormalCharge(1)
    atom.SetNoImplicit(True)
    atom.SetNumExplicitHs(int(3 - valence))
    try:
        Chem.SanitizeMol(mol)
    except Exception:
        assume(False)
    smiles = Chem.MolToSmiles(mol)
    assume(Chem.MolFromSmiles(smiles) is not None)
    return smiles


def _clean(message) -> bool:
    return isinstance(message, str) and bool(message.strip()) and "\n" not in message and "Traceback" not in message


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(carbocation_smiles())
def test_parsing_random_carbocations_gives_a_species_or_an_input_error(smiles):
    try:
        cation = carbocation(smiles)
    except InputError as exc:
        assert _clean(str(exc))
        return
    assert cation.charge == 1
    adduct = hydride_adduct(cation)
    assert adduct.charge == 0 and Chem.MolFromSmiles(adduct.smiles) is not None


@settings(max_examples=300, deadline=None)
@given(st.text(max_size=40))
def test_arbitrary_text_gives_a_species_or_an_input_error(text):
    try:
        carbocation(text)
    except InputError as exc:
        assert _clean(str(exc))


def _run_hia(smiles: str) -> None:
    quick = Settings(conformers=ConformerSettings(max_conformers=3, n_optimize=1), max_mode_follows=1)
    records = run_task("hia", [(smiles, "")], quick, workers=1)
    assert len(records) == 1
    record = records[0]
    if "error" in record:
        assert _clean(record["error"]), record["error"]
    else:
        assert math.isfinite(record["hia_kcal_mol"]) and math.isfinite(record["hia_G_kcal_mol"])


@settings(max_examples=6, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(carbocation_smiles(max_heavy=4))
def test_random_carbocations_through_the_whole_pipeline_end_as_a_value_or_a_clean_error(smiles):
    _run_hia(smiles)


@pytest.mark.slow
@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(carbocation_smiles(max_heavy=6))
def test_many_random_carbocations_through_the_whole_pipeline(smiles):
    _run_hia(smiles)
