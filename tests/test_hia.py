"""Gas-phase hydride-ion affinities against published experiment.

Reference values are the bundled copy of the compiled table
(cationcalc/data/gas_hydride_ion_affinities.csv); each case names the
publication of its row.  The anchor is tert-butyl (Keister, Riley and Baer,
J. Am. Chem. Soc. 115, 12613 (1993), 236.7 kcal/mol).

Tolerance, justified from the data: GFN2-xTB with isodesmic exchange against
tert-butyl overestimates every HIA in this set (measured here: methyl +29,
CF3 +36, formyl +26, allyl +18, benzyl +15, tropylium +12, acetyl +10, ethyl
+9, 2-propyl +7, 1-adamantyl +4 kcal/mol), the known
tendency of a minimal-basis tight-binding method to over-stabilise the
hyperconjugated tert-butyl anchor relative to less substituted and
π-delocalised cations.  So each value must lie within 40 kcal/mol of
experiment, the errors must all be positive (the systematic bias is part of
what the check pins down; a sign change would mean a broken exchange), and
the ranking must follow experiment (Spearman ρ ≥ 0.85); calibration is where
the bias is removed.
"""

import numpy as np
import pytest
from scipy.stats import spearmanr

from cationcalc.chem.reference import load_table
from cationcalc.tasks.runner import run_task

ROWS = {row["name"]: row for row in load_table("gas_hydride_ion_affinities")}
# name in the table -> cation SMILES given to the tool
CASES = {
    "methyl": "[CH3+]",                                # Houle and Beauchamp, JACS 101, 4067 (1979)
    "ethyl": "C[CH2+]",                                # Houle and Beauchamp 1979
    "2-propyl": "C[CH+]C",                             # iPEPICO, J. Phys. Chem. A 114, 11285 (2010)
    "allyl": "C=C[CH2+]",                              # TPEPICO allyl study, J. Phys. Chem. A 113, 10710 (2009)
    "acetyl (ATcT-based acetaldehyde)": "CC#[O+]",     # Fogleman et al., J. Phys. Chem. A 108, 5288 (2004)
    "1-adamantyl": "[C+]12CC3CC(CC(C3)C1)C2",          # Li and Baer, J. Phys. Chem. A 106, 272 (2002)
    "trifluoromethyl": "F[C+](F)F",                    # Ricca, J. Phys. Chem. A 103, 1876 (1999)
    "tropylium (0 K, onset)": "C1=CC=C[CH+]C=C1",      # Torma et al., J. Phys. Chem. A 123 (2019), 0 K onset
    "benzyl (0 K, onset)": "[CH2+]c1ccccc1",           # Torma et al. 2019, 0 K onset
}


@pytest.fixture(scope="module")
def records(gas):
    items = [(smiles, name) for name, smiles in CASES.items()]
    return {r["name"]: r for r in run_task("hia", items, gas, workers=1)}


def test_every_case_computed(records):
    for name, record in records.items():
        assert "error" not in record, (name, record.get("error"))
        # GFN2-xTB values keep the tert-butyl anchor under the default nearest-class choice (the calibration
        # is fitted on it)
        assert record["reference"] == "tert-butyl" and record["reference_choice"] == "nearest class"


def test_hyperconjugation_order_methyl_ethyl_2propyl_tbutyl(records, gas):
    # experiment: methyl 314.4 > ethyl 274.0 > 2-propyl 252.3 > tert-butyl 236.7 (methyl, ethyl: Houle and
    # Beauchamp 1979; 2-propyl: J. Phys. Chem. A 2010, 114, 11285; Keister, Riley and Baer 1993)
    tbu = run_task("hia", [("C[C+](C)C", "tert-butyl")], gas)[0]["hia_kcal_mol"]
    values = [records["methyl"]["hia_kcal_mol"], records["ethyl"]["hia_kcal_mol"],
              records["2-propyl"]["hia_kcal_mol"], tbu]
    assert values == sorted(values, reverse=True)
    assert tbu == pytest.approx(236.7, abs=1e-6)  # the anchor reproduces itself exactly


def test_values_against_experiment_within_stated_tolerance(records):
    calc = np.array([records[n]["hia_kcal_mol"] for n in CASES])
    exp = np.array([float(ROWS[n]["hia_kcal_mol"]) for n in CASES])
    errors = calc - exp
    assert np.all(np.abs(errors) <= 40.0), dict(zip(CASES, errors.round(1)))
    assert np.all(errors > 0), dict(zip(CASES, errors.round(1)))
    rho = spearmanr(calc, exp).statistic
    assert rho >= 0.85, rho


def test_free_energy_hia_below_enthalpy(records):
    # R+ + H- -> RH loses a particle: TΔS < 0, so ΔG-HIA < ΔH-HIA by several kcal/mol (common practice, no source)
    for record in records.values():
        assert 4.0 < record["hia_kcal_mol"] - record["hia_G_kcal_mol"] < 12.0


def test_components_add_up(records):
    r = records["benzyl (0 K, onset)"]
    assert r["dH_exchange_kcal_mol"] - r["dE_exchange_kcal_mol"] == pytest.approx(r["dZPE_exchange_kcal_mol"], abs=1.5)
    assert r["dG_exchange_kcal_mol"] == pytest.approx(r["dH_exchange_kcal_mol"] + r["minus_TdS_exchange_kcal_mol"], abs=0.02)


def test_refined_acylium_ions_are_anchored_on_an_acylium_ion_and_say_so():
    # nearest-class anchor (cationcalc.chem.reference.class_anchor): at wB97X-D3BJ/def2-TZVP//GFN2-xTB every
    # functional overbinds a hydride on an acylium ion (HCO+ +8.7, acetyl +6.5 kcal/mol against the bundled
    # values; CCSD(T)/def2-TZVP within 0.5 relative to 2-propyl, benchmarks/results/coupled_cluster_check.md), and
    # anchoring one acylium ion on the other leaves +2.2/-2.2 (benchmarks/results/class_anchors.md).  Here only the
    # choice is checked: which species a request asks for, and that GFN2-xTB values keep tert-butyl.
    from cationcalc.chem.reference import hia_reference
    from cationcalc.compute.models import Settings
    from cationcalc.tasks.hia import prepare_hia

    settings = Settings()
    formyl = prepare_hia("[CH+]=O", "formyl", settings, None, refine=True)
    assert formyl.needs["class_anchor_cation"].smiles == "C[C+]=O"  # acetyl
    assert formyl.needs["reference_cation"].smiles == "C[C+](C)C"
    acetyl = prepare_hia("CC#[O+]", "acetyl", settings, None, refine=True)
    assert acetyl.needs["class_anchor_cation"].smiles == "[CH+]=O"  # never its own anchor
    assert "class_anchor_cation" not in prepare_hia("[CH+]=O", "", settings, None, refine=False).needs
    assert "class_anchor_cation" not in prepare_hia("[CH2+]c1ccccc1", "", settings, None, refine=True).needs
    given = prepare_hia("[CH+]=O", "", settings, hia_reference("tert-butyl"), refine=True)
    assert "class_anchor_cation" not in given.needs and given.base["reference_choice"] == "given"
