"""Reference sets, statistics, trend logic and ``cationcalc check --quick``.

Sources of the reference values are in the bundled tables (``source``
column of every row) and are named where a value is used:

* gas-phase HIA: cationcalc/data/gas_hydride_ion_affinities.csv (Houle and
  Beauchamp, J. Am. Chem. Soc. 101, 4067 (1979); Keister, Riley and Baer,
  J. Am. Chem. Soc. 115, 12613 (1993); Torma et al., J. Phys. Chem. A 123
  (2019); Fogleman et al., J. Phys. Chem. A 108, 5288 (2004); Ricca, J. Phys.
  Chem. A 103, 1876 (1999); the TPEPICO allyl study, J. Phys. Chem. A 113,
  10710 (2009); Li and Baer, J. Phys. Chem. A 106, 272 (2002); formyl from
  the NIST Chemistry WebBook heats of formation and proton affinity of CO);
* σ⁺: Brown and Okamoto, J. Am. Chem. Soc. 80, 4979 (1958) (values from memory);
* Mayr E: Mayr et al., J. Am. Chem. Soc. 123, 9500 (2001) (values from memory);
* pKR⁺: Deno, Jaruzelski and Schriesheim, J. Am. Chem. Soc. 77, 3044 (1955)
  (values from memory), Breslow and Groves, J. Am. Chem. Soc. 92, 984 (1970).

Thresholds of the quick check come from the measured full run
(benchmarks/results/check_full.md, GFN2-xTB/tblite, default settings) and the
quick run of the same species (the quick subset is a subset of the full one,
so its numbers are the full run's numbers for those species):

* gas HIA, 9 cations (the full set of 10 less 1-adamantyl, the costliest):
  every raw error positive (measured +7 … +36 kcal/mol), raw MAE 18.0 (full
  run, n 10: 16.6) → asserted 12–26; leave-one-out calibrated MAE 6.0 (full
  run: 5.9) → ≤ 9; slope a 0.804 (full run 0.79) → 0.6–1.0;
* σ⁺ benzyl, 9 cations: slope +23.6 kcal/mol per σ⁺ unit, r 0.947 (see the
  xfail below); Spearman ρ 0.87 → asserted ≥ 0.8;
* Mayr E, 3 cheapest benzhydrylium ions (quick): sign asserted only (three
  points do not fix r; the full run, n 14, has r 0.989 and ρ 0.996);
* trend verdicts as measured, including the two known failures of GFN2-xTB
  (benzyl vs 2-propyl compressed and inverted, 2-propenyl below allyl).
"""

import json
from collections import defaultdict

import numpy as np
import pytest
from rdkit import Chem
from rdkit.Chem.rdMolDescriptors import CalcMolFormula

from cationcalc.checks.reference_sets import ISOMERS, TREND_CATIONS, alcohol_smiles, cumyl_smiles, reference_sets
from cationcalc.checks.statistics import correlation_statistics
from cationcalc.checks.trends import trend_checks
from cationcalc.cli import check_command as checks
from cationcalc.chem.reference import load_table
from cationcalc.chem.species import carbocation

TABLES = {  # table → (SMILES column, value column)
    "gas_hydride_ion_affinities": ("cation_smiles", "hia_kcal_mol"),
    "mayr_electrophilicity": ("cation_smiles", "E"),
    "pkr_plus": ("cation_smiles", "pKR"),
    "sigma_plus": ("benzyl_cation_smiles", "sigma_plus"),
}


# ---------------------------------------------------------------- bundled data

@pytest.mark.parametrize("table", sorted(TABLES))
def test_bundled_table_parses_and_every_row_has_a_source(table):
    smiles_col, value_col = TABLES[table]
    rows = load_table(table)
    assert len(rows) >= 9
    for row in rows:
        assert row["source"].strip(), row
        assert row["status"].strip(), row
        float(row[value_col])
        mol = Chem.MolFromSmiles(row[smiles_col])
        assert mol is not None and Chem.GetFormalCharge(mol) == 1, row[smiles_col]


def test_no_duplicate_species_within_a_reference_set():
    for key, rs in reference_sets().items():
        canon = [carbocation(e.smiles).smiles for e in rs.entries]
        assert len(set(canon)) == len(canon), key
        assert len({e.name for e in rs.entries}) == len(rs.entries), key
        assert all(e.source.strip() for e in rs.entries), key


def test_duplicates_in_the_tables_are_left_out_by_a_stated_rule():
    # pkr_plus.csv holds two measurements for 4,4'-dimethoxytrityl and tropylium, the HIA table two for
    # tert-butyl: each set keeps one and lists the other with its reason
    sets = reference_sets()
    by_table = {"gas_hydride_ion_affinities": sets["gas_hia"], "mayr_electrophilicity": sets["mayr_E"],
                "pkr_plus": sets["pkr"]}
    for table, rs in by_table.items():
        value_col = TABLES[table][1]
        groups = defaultdict(list)
        for row in load_table(table):  # a row is identified by its name and value (names repeat in pkr_plus)
            groups[Chem.CanonSmiles(row["cation_smiles"])].append((row["name"], float(row[value_col])))
        kept = {(e.name, e.value) for e in rs.entries}
        left_out = {(e.name, e.value): e.note for e in rs.excluded}
        for rows in groups.values():
            assert sum(r in kept for r in rows) <= 1, rows
            for r in rows:
                assert r in kept or left_out.get(r), (table, r)


def test_gas_set_leaves_out_anchor_and_non_minima():
    rs = reference_sets()["gas_hia"]
    names = {e.name for e in rs.entries}
    assert not any("tert-butyl" in n or "threshold" in n for n in names)
    assert {"methyl", "2-propyl", "allyl", "benzyl (0 K, onset)"} <= names
    assert set(rs.quick) <= names
    reasons = {e.name: e.note for e in rs.excluded}
    assert "anchor" in reasons["tert-butyl (1993 PEPICO)"]
    assert "not a minimum" in reasons["1-propyl (threshold ion)"]


def test_mayr_set_is_benzhydrylium_ions_only():
    # the E scale's reference electrophiles are benzhydrylium ions (Mayr et al. 2001)
    diaryl = Chem.MolFromSmarts("[CH+;!R](c)c")
    for e in reference_sets()["mayr_E"].entries:
        assert Chem.MolFromSmiles(e.smiles).HasSubstructMatch(diaryl), e.name


def test_cumyl_and_alcohol_builders():
    for row in load_table("sigma_plus"):
        benzyl = Chem.MolFromSmiles(row["benzyl_cation_smiles"])
        cumyl = Chem.MolFromSmiles(cumyl_smiles(row["benzyl_cation_smiles"]))
        assert Chem.GetFormalCharge(cumyl) == 1
        assert cumyl.GetNumAtoms() == benzyl.GetNumAtoms() + 2
        assert carbocation(Chem.MolToSmiles(cumyl)).smiles  # one carbenium centre
    alcohol = Chem.MolFromSmiles(alcohol_smiles("CN(C)c1ccc(cc1)[C+](c1ccccc1)c1ccc(N(C)C)cc1"))
    assert Chem.GetFormalCharge(alcohol) == 0 and CalcMolFormula(alcohol) == "C23H26N2O"


# ---------------------------------------------------------------- statistics and trend logic

def test_correlation_statistics_on_synthetic_data():
    x = np.array([-0.8, -0.3, 0.0, 0.1, 0.6, 0.8])  # synthetic
    s = correlation_statistics(x, 20.0 * x + 250.0)
    assert s["slope"] == pytest.approx(20.0) and s["intercept"] == pytest.approx(250.0)
    assert s["r"] == pytest.approx(1.0) and s["spearman_rho"] == pytest.approx(1.0)
    s = correlation_statistics(x, -3.0 * x + np.array([0.1, -0.1, 0.05, 0.0, -0.05, 0.1]))
    assert s["slope"] < 0 and s["r"] < -0.99
    assert correlation_statistics(x[:2], x[:2])["r"] is None


def _fake_hia(values):
    return {carbocation(TREND_CATIONS[k]).smiles: {"hia_kcal_mol": v} for k, v in values.items()}


def test_trend_logic_on_synthetic_values():
    # invented HIA values in the experimental order: every HIA trend passes; swapping two flips one verdict
    gas = {row["name"]: float(row["hia_kcal_mol"]) for row in load_table("gas_hydride_ion_affinities")}
    good = {"methyl": 314, "ethyl": 274, "2-propyl": 247, "tert-butyl": 236.7, "1-phenylethyl": 230,
            "1-methylallyl": 240, "cumyl": 225, "allyl": 258, "benzyl": 241, "vinyl": 289, "2-propenyl": 262,
            "phenyl": 287}
    isomers = {f: {n: (0.0 if i == 0 else 10.0) for i, n in enumerate(g)} for f, g in ISOMERS.items()}
    corr = {"sigma_benzyl": {"n": 9, "slope": 20.0, "r": 0.97, "sign_ok": True, "rho_plus": -14.0}}
    table = {t["check"]: t["passed"] for t in trend_checks(_fake_hia(good), isomers, corr, gas)}
    assert all(table.values()), table
    swapped = dict(good, methyl=270, ethyl=274)
    table = {t["check"]: t["passed"] for t in trend_checks(_fake_hia(swapped), isomers, corr, gas)}
    assert table["hyperconjugation"] is False and table["resonance: cumyl vs tert-butyl"] is True
    isomers["C3H3+"]["propargyl"] = -5.0
    corr["sigma_benzyl"]["r"] = 0.90
    table = {t["check"]: t["passed"] for t in trend_checks(_fake_hia(good), isomers, corr, gas)}
    assert table["aromatic stabilization C3H3+"] is False and table["σ⁺ series: para-benzyl"] is False


# ---------------------------------------------------------------- the quick check (computes ~60 species)

@pytest.fixture(scope="module")
def quick(tmp_path_factory):
    out = tmp_path_factory.mktemp("check")
    code = checks.main(["--quick", "--output", str(out), "--workers", "2", "--json"])
    report = json.loads((out / "check_report.json").read_text(encoding="utf-8"))
    return code, report, out


def test_quick_check_runs_and_writes_plots_and_sources(quick):
    code, report, out = quick
    assert code == 0
    assert report["quick"] and set(report["skipped"]) == {"pkr", "sigma_cumyl"}
    assert {"gas_hia", "sigma_benzyl", "mayr_E"} <= set(report["sets"])
    for key in report["sets"]:
        assert (out / f"check_{key}.png").stat().st_size > 10_000
    text = (out / "check_report.md").read_text(encoding="utf-8")
    for source in ("Houle, F. A.; Beauchamp", "Keister", "Torma", "Brown, H. C.; Okamoto", "Mayr, H.; Bug"):
        assert source in text, source


def test_quick_gas_hia_errors_and_calibration(quick):
    gas = quick[1]["sets"]["gas_hia"]
    assert gas["raw"]["n"] == 9
    residuals = [e["residual"] for e in gas["entries"]]
    # GFN2-xTB with exchange against tert-butyl overestimates every HIA of the set (measured +7 … +36)
    assert min(residuals) > 0
    assert 12.0 <= gas["raw"]["mae"] <= 26.0  # measured 18.0
    assert gas["loo"]["mae"] <= 9.0  # measured 6.0
    assert gas["loo"]["rmse"] < gas["raw"]["rmse"]
    assert 0.6 < gas["fit"]["a"] < 1.0  # measured 0.80: the method stretches the HIA scale
    assert set(gas["groups"]) == {"alkyl", "allylic/benzylic", "aromatic", "heteroatom-stabilized"}
    worst = gas["worst"][0]
    assert worst["name"] == "trifluoromethyl" and worst["residual"] == max(residuals)


def test_quick_mayr_sign(quick):
    mayr = quick[1]["sets"]["mayr_E"]
    assert mayr["n"] == 3 and mayr["sign_ok"]  # more electrophilic (larger E) ↔ larger HIA


MEASURED_VERDICTS = {  # the measured full run (benchmarks/results/check_full.md)
    "hyperconjugation": True,
    "resonance: 1-phenylethyl vs 2-propyl": True,
    "resonance: 1-methylallyl vs 2-propyl": True,
    "resonance: cumyl vs tert-butyl": True,
    "benzyl (primary) vs tert-butyl": True,
    "benzyl vs 2-propyl": False,  # GFN2-xTB: benzyl 1 kcal/mol above 2-propyl; experiment 6 below
    "aromatic stabilization C7H7+": True,
    "aromatic stabilization C3H3+": True,
    "σ cation: vinyl vs 2-propyl": True,
    "σ cation: phenyl vs 2-propyl": True,
    "2-propenyl (vinylic) vs allyl": False,  # GFN2-xTB overstabilizes the vinyl cation by ~20 kcal/mol
}


def test_quick_trend_verdicts(quick):
    trends = {t["check"]: t for t in quick[1]["trends"]}
    for name, verdict in MEASURED_VERDICTS.items():
        assert trends[name]["passed"] is verdict, (name, trends[name]["computed"])
    # the verdict follows the numbers shown: recompute from the gas-set HIAs in the report
    gas = {e["name"]: e["calc"] for e in quick[1]["sets"]["gas_hia"]["entries"]}
    assert trends["benzyl vs 2-propyl"]["passed"] is (gas["benzyl (0 K, onset)"] < gas["2-propyl"])
    for t in trends.values():
        assert t["source"], t


def test_sigma_plus_benzyl_gas_sign_and_order(quick):
    # Brown and Okamoto, J. Am. Chem. Soc. 80, 4979 (1958) (σ⁺ values from memory): electron donors stabilise
    # the benzyl cation, so its gas-phase HIA rises with σ⁺ (positive slope, ρ⁺ < 0)
    s = quick[1]["sets"]["sigma_benzyl"]
    assert s["n"] == 9 and s["slope"] > 0 and s["sign_ok"] and s["rho_plus"] < 0
    assert s["spearman_rho"] >= 0.8  # measured 0.87
    assert s["r"] >= 0.9  # measured 0.947


@pytest.mark.xfail(strict=True, reason="measured r = 0.947 < 0.95 with GFN2-xTB (4-F and 4-Cl off the line): see "
                                       "benchmarks/results/check_full.md; strict, so a fix shows up as a failure. With DFT "
                                       "refinement the criterion is met (tests/test_refine.py, r 0.994)")
def test_sigma_plus_benzyl_gas_correlation_r_at_least_095(quick):
    # the criterion: r ≥ 0.95 for para-substituted benzyl cations in the gas phase (Brown–Okamoto 1958)
    assert quick[1]["sets"]["sigma_benzyl"]["r"] >= 0.95
