"""DFT refinement tier (PySCF single points on GFN2-xTB structures).

Published figures come from the bundled gas-phase HIA table
(cationcalc/data/gas_hydride_ion_affinities.csv, read with
``cationcalc.chem.reference.load_table``); each check names the publication of
its row.  The anchor of these four is tert-butyl (their nearest-class anchor), 236.7 kcal/mol (Keister, Riley and Baer,
J. Am. Chem. Soc. 115, 12613 (1993)).

Tolerances of the HIA checks at wB97X-D3BJ/def2-SVP//GFN2-xTB, set from
the measured benchmark (benchmarks/dft_levels.py, results/dft_levels.md):
each cation within 7.0 kcal/mol, and the mean absolute error of the four
within 3.0 kcal/mol.  The single-value bound is the largest error of any
offered DFT level on these four cations (2-propyl, +6.2 to +6.8 kcal/mol
at every functional and basis: a shared offset from the 1979 reference
value or the GFN2-xTB geometry, not the functional) plus the experimental
uncertainty of the derived values (≥ ±1 kcal/mol from two heats of
formation, common practice, no source; benzyl onset ±1.8 kcal/mol, Torma et
al. 2019).  The mean bound is the benchmark goal (2.5 kcal/mol) plus 0.5 for
the 0 K conversion of the benzyl onset (README of the reference data: 1–2
kcal/mol between 0 K and 298 K values, converted here, residual ≤ 0.5
assumed).  GFN2-xTB fails both (methyl +29, allyl +18, benzyl +13 kcal/mol;
mean 17 kcal/mol; tests/test_hia.py), so the checks can fail.
Benzyl and tropylium values are 0 K onsets: the computed HIA is converted to
0 K with the GFN2-xTB thermal contents before the comparison.
"""

from __future__ import annotations

import json
import sys

import pytest

pytest.importorskip("pyscf")
pytest.importorskip("pyscf.dispersion")

from cationcalc.chem import units  # noqa: E402
from cationcalc.engines.pyscf_engine import (  # noqa: E402
    ChargeMultiplicityError,
    DFTConvergenceError,
    dft_single_point,
    spin_of,
)
from cationcalc.execution.executors import compute_one  # noqa: E402
from cationcalc.compute.models import Settings  # noqa: E402
from cationcalc.chem.reference import load_table  # noqa: E402
from cationcalc.execution.refine import (  # noqa: E402
    MAX_BASIS_FUNCTIONS,
    RefineError,
    estimate_cost,
    offered_levels,
    parse_level,
    refine_many,
    refine_result,
    select_for_refinement,
    xtb_key,
)
from cationcalc.chem.species import species  # noqa: E402
from cationcalc.tasks.runner import run_task  # noqa: E402

LEVEL = "wB97X-D3BJ/def2-SVP"
TOLERANCE_KCAL_MOL = 7.0  # each cation; justified in the module docstring
MEAN_TOLERANCE_KCAL_MOL = 3.0  # mean absolute error of the four; module docstring
ROWS = {row["name"]: row for row in load_table("gas_hydride_ion_affinities")}
CASES = {
    "methyl": "[CH3+]",                       # Houle and Beauchamp, J. Am. Chem. Soc. 101, 4067 (1979)
    "2-propyl": "C[CH+]C",                    # iPEPICO, J. Phys. Chem. A 114, 11285 (2010)
    "allyl": "C=C[CH2+]",                     # TPEPICO allyl study, J. Phys. Chem. A 113, 10710 (2009)
    "benzyl (0 K, onset)": "[CH2+]c1ccccc1",  # Torma, Voronova, Sztáray, Bodi, J. Phys. Chem. A 123 (2019), 0 K
}
H_ATOM = ([1], [[0.0, 0.0, 0.0]])
METHYL = ([6, 1, 1, 1], [[0, 0, 0], [0, 0, 1.09], [1.03, 0, -0.36], [-0.51, 0.89, -0.36]])


@pytest.fixture(scope="module")
def refined_hia(tmp_path_factory):
    """HIA records of the four cations plus 1-propyl (which rearranges at GFN2-xTB), refined at LEVEL."""
    items = [(smiles, name) for name, smiles in CASES.items()] + [("CC[CH2+]", "1-propyl")]
    return {r["name"]: r for r in run_task("hia", items, Settings(), workers=1, refine=LEVEL)}


def _kelvin_0(record: dict) -> float:
    """The record's HIA converted from 298 K to 0 K with the thermal contents of cation and adduct."""
    from cationcalc.execution.executors import compute_many
    from cationcalc.chem.species import Species, carbocation, hydride_adduct

    cation = carbocation(record["cation_smiles"])
    res = compute_many([Species(cation.smiles, 1, 1), hydride_adduct(cation)], Settings())
    c, a = res.values()

    def content(r):
        return (r.H_hartree - r.E_hartree) * units.HARTREE_TO_KCAL_MOL - r.zpe_kcal_mol

    return record["hia_kcal_mol"] + content(a) - content(c) - 2.5 * units.rt_kcal_mol(298.15)


@pytest.mark.parametrize("name", list(CASES))
def test_refined_hia_against_gas_phase_experiment(refined_hia, name):
    record = refined_hia[name]
    assert not record.get("error"), record.get("error")
    row = ROWS[name]
    value = _kelvin_0(record) if row["T_K"] == "0" else record["hia_kcal_mol"]
    # sources: see CASES (methyl, 2-propyl: Houle and Beauchamp 1979; allyl: J. Phys. Chem. A 2009;
    # benzyl: Torma et al. 2019); anchor tert-butyl: Keister, Riley and Baer 1993
    assert value == pytest.approx(float(row["hia_kcal_mol"]), abs=TOLERANCE_KCAL_MOL)


def test_refined_hia_mean_error_of_the_four(refined_hia):
    # sources as in CASES; the same four with GFN2-xTB alone are off by 17 kcal/mol on average
    errors = []
    for name in CASES:
        record, row = refined_hia[name], ROWS[name]
        value = _kelvin_0(record) if row["T_K"] == "0" else record["hia_kcal_mol"]
        errors.append(abs(value - float(row["hia_kcal_mol"])))
    assert sum(errors) / len(errors) <= MEAN_TOLERANCE_KCAL_MOL


def test_benzyl_below_2_propyl_as_in_experiment(refined_hia):
    # experiment: benzyl 240.8 (0 K; Torma et al. 2019) < 2-propyl 252.3 (J. Phys. Chem. A 2010, 114, 11285)
    assert float(ROWS["benzyl (0 K, onset)"]["hia_kcal_mol"]) < float(ROWS["2-propyl"]["hia_kcal_mol"])
    assert refined_hia["benzyl (0 K, onset)"]["hia_kcal_mol"] < refined_hia["2-propyl"]["hia_kcal_mol"]


def test_refined_value_differs_from_xtb_and_names_both_levels(refined_hia):
    r = refined_hia["benzyl (0 K, onset)"]
    # GFN2-xTB puts benzyl ~13-15 kcal/mol too high (tests/test_hia.py); the DFT value must move well away
    assert abs(r["hia_kcal_mol"] - r["hia_xtb_kcal_mol"]) > 5.0
    assert list(r).index("hia_xtb_kcal_mol") == list(r).index("hia_kcal_mol") + 1
    assert "hia_G_xtb_kcal_mol" in r and "hia_xtb_kJ_mol" in r
    assert "reference_hia_xtb_kcal_mol" not in r  # the anchor is an input, not a computed value
    assert r["refine_level"] == LEVEL
    assert LEVEL in r["refine_note"] and "GFN2-xTB" in r["refine_note"] and "Hessian" in r["refine_note"]
    assert r["level"].startswith(LEVEL + "//GFN2-xTB")
    assert not any(k.endswith("_uncertainty_kcal_mol") for k in r)  # GFN2-xTB error bars do not apply


def test_rearranged_cation_is_refined_as_what_it_became(refined_hia):
    # 1-propyl cation is not a minimum (threshold ion: Schultz, Houle, Beauchamp 1984); at GFN2-xTB it
    # undergoes a 1,2-H shift to 2-propyl (DEVELOPERS.md)
    r = refined_hia["1-propyl"]
    assert r["rearranged"] is True
    assert any("refined as what GFN2-xTB relaxed it to" in w for w in r["warnings"])
    # same structure after relaxation: the refined HIA equals 2-propyl's within conformer noise
    assert r["hia_kcal_mol"] == pytest.approx(refined_hia["2-propyl"]["hia_kcal_mol"], abs=1.0)


def test_wrong_charge_multiplicity_is_refused_with_a_clear_message():
    methyl_cation = compute_one(species("[CH3+]"), Settings())
    wrong = methyl_cation.model_copy(update={"multiplicity": 2})  # 8 electrons cannot be a doublet
    with pytest.raises(ChargeMultiplicityError, match=r"charge \+1 with multiplicity 2 is impossible: 8 electrons"):
        refine_result(wrong, LEVEL, Settings())
    with pytest.raises(ChargeMultiplicityError, match="multiplicity 1"):
        dft_single_point(*METHYL, charge=0, multiplicity=1, xc="b3lyp-d3bj", basis="def2-svp")


def test_spin_is_two_s_and_open_shells_run_unrestricted():
    assert spin_of([6, 1, 1, 1], 0, 2) == 1 and spin_of([6, 1, 1], 0, 3) == 2 and spin_of([6, 1, 1, 1], 1, 1) == 0
    h = dft_single_point(*H_ATOM, charge=0, multiplicity=2, xc="b3lyp-d3bj", basis="def2-svp")
    # exact non-relativistic H atom energy is −0.5 Eh (textbook); B3LYP/def2-SVP lies within 5 mEh of it
    assert not h.restricted and h.spin == 1
    assert h.energy_hartree == pytest.approx(-0.5, abs=5e-3)
    assert h.s_squared == pytest.approx(0.75, abs=1e-6)


def test_scf_falls_back_to_second_order_then_fails_clearly():
    kwargs = dict(charge=0, multiplicity=2, xc="b3lyp-d3bj", basis="def2-svp")
    plain = dft_single_point(*METHYL, **kwargs)
    rescued = dft_single_point(*METHYL, max_cycle=3, **kwargs)
    assert plain.scf_route == "DIIS" and rescued.scf_route == "DIIS, then second-order (Newton)"
    assert rescued.energy_hartree == pytest.approx(plain.energy_hartree, abs=1e-6)
    with pytest.raises(DFTConvergenceError, match="did not converge"):
        dft_single_point(*METHYL, max_cycle=2, newton_max_cycle=1, **kwargs)


def test_level_names_and_unknown_level():
    assert parse_level("ωB97X-D3(BJ)/def2-TZVP").name == "wB97X-D3BJ/def2-TZVP"
    assert parse_level("b3lyp-d3bj/DEF2-svp/cpcm").solvent_model == "CPCM"
    with pytest.raises(RefineError) as info:
        parse_level("PBE/6-31G*")
    message = str(info.value)
    assert "\n" not in message and all(name in message for name in offered_levels())


def test_cost_estimate_and_size_limit():
    small = estimate_cost([6] * 7 + [1] * 7, "B3LYP-D3BJ/def2-SVP")
    # def2-SVP: C 3s2p1d = 14 spherical functions, H 2s1p = 5 (basis definition)
    assert small.n_basis == 7 * 14 + 7 * 5 and not small.over_limit and small.memory_mb > 300
    assert estimate_cost([6] * 7 + [1] * 7, "B3LYP-D3BJ/def2-TZVP").seconds > small.seconds
    methyl_cation = compute_one(species("[CH3+]"), Settings())
    big = methyl_cation.model_copy(update={"numbers": [6] * 40 + [1] * 41,  # C40H41+, closed shell
                                           "positions_angstrom": [[0.0, 0.0, 1.5 * i] for i in range(81)]})
    assert estimate_cost(big.numbers, "wB97X-D3BJ/def2-TZVP").n_basis > MAX_BASIS_FUNCTIONS
    with pytest.raises(RefineError, match="--force"):
        refine_result(big, "wB97X-D3BJ/def2-TZVP", Settings())


def test_solvent_routes_are_named_and_smd_hydrates_water():
    water = Settings(solvent="water")
    result = compute_one(species("O"), water)
    alpb = refine_result(result, LEVEL, water)
    smd = refine_result(result, LEVEL + "/SMD", water)
    assert "ΔG_solv[ALPB]" in alpb.level and "SMD(water)" in smd.level
    assert alpb.key != smd.key != result.key
    gas = dft_single_point(result.numbers, result.positions_angstrom, charge=0, multiplicity=1,
                           xc=parse_level(LEVEL).functional.xc, basis="def2-svp")
    dg_smd = smd.E_hartree + _xtb_minus_best(result, water) - gas.energy_hartree  # E_DFT(SMD) − E_DFT(gas)
    # hydration free energy of water −6.3 kcal/mol: value from memory of the Minnesota Solvation
    # Database (Marenich, Kelly, Olson, Cramer, Truhlar); SMD is parametrised to ~1 kcal/mol on such data
    assert dg_smd * units.HARTREE_TO_KCAL_MOL == pytest.approx(-6.3, abs=1.5)
    with pytest.raises(RefineError, match="no solvent is set"):
        refine_result(compute_one(species("O"), Settings()), LEVEL + "/CPCM", Settings())


def _xtb_minus_best(result, settings) -> float:
    """E_xTB at the result's geometry minus result.E_hartree (0 unless the G-best conformer is not the E-lowest)."""
    from cationcalc.engines import get_engine

    r = get_engine(settings.engine).compute(result.numbers, result.positions_angstrom, charge=result.charge,
                                            multiplicity=result.multiplicity, solvent=settings.solvent)
    return r.energy_ev / units.HARTREE_EV - result.E_hartree


def test_refined_results_are_stored_by_level(tmp_path):
    from cationcalc.execution.store import ResultStore

    sp = species("O")
    result = compute_one(sp, Settings())
    with ResultStore(tmp_path / "s.sqlite") as store:
        first = refine_many({sp: result}, LEVEL, Settings(), store=store)
        again = refine_many({sp: result}, LEVEL, Settings(), store=store)
        other = refine_many({sp: result}, "B3LYP-D3BJ/def2-SVP", Settings(), store=store)
        assert again.info == {} and again[sp].E_hartree == first[sp].E_hartree
        assert other[sp].key != first[sp].key and other[sp].E_hartree != first[sp].E_hartree
        assert len(store) == 2


def test_selection_and_key_names():
    assert xtb_key("hia_kcal_mol") == "hia_xtb_kcal_mol" and xtb_key("dG_ion_kJ_mol") == "dG_ion_xtb_kJ_mol"
    assert xtb_key("name") is None
    groups = [[{"hia_kcal_mol": v}] for v in (250.0, 240.0, 244.0, 260.0)] + [[{"error": "bad input"}]]
    assert select_for_refinement("hia", groups, top_k=2) == {(1, 0), (2, 0)}
    assert select_for_refinement("hia", groups, window_kcal_mol=10.0) == {(0, 0), (1, 0), (2, 0)}
    assert len(select_for_refinement("hia", groups)) == 4
    sites = [[{"dG_ion_kcal_mol": 5.0}, {"dG_ion_kcal_mol": 1.0}], [{"dG_ion_kcal_mol": 9.0}]]
    assert select_for_refinement("sites", sites, top_k=1) == {(0, 1), (1, 0)}  # one ranking per substrate


def test_cli_refine_without_pyscf_says_how_to_install(monkeypatch, capsys):
    from cationcalc.cli.main import main

    monkeypatch.setitem(sys.modules, "pyscf", None)  # import pyscf now raises ImportError
    assert main(["hia", "C[C+](C)C", "--refine"]) == 2
    assert "pip install 'cationcalc[dft]'" in capsys.readouterr().err


def test_cli_unknown_level_exits_2_with_the_offered_levels(capsys):
    from cationcalc.cli.main import main

    assert main(["hia", "C[C+](C)C", "--refine", "HF/STO-3G"]) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and "wB97X-D3BJ/def2-TZVP" in err


@pytest.mark.slow
def test_cli_benzyl_at_default_level_within_published_uncertainty(capsys):
    from cationcalc.cli.main import main
    from cationcalc.execution.refine import DEFAULT_LEVEL

    assert main(["hia", "[CH2+]c1ccccc1", "--refine", "--json", "--workers", "1"]) == 0
    record = json.loads(capsys.readouterr().out)[0]
    assert record["refine_level"] == DEFAULT_LEVEL
    # 240.8 ± 1.8 kcal/mol (11.196 ± 0.080 eV onset; Torma, Voronova, Sztáray, Bodi, J. Phys. Chem. A 2019),
    # plus up to 2 kcal/mol between the 0 K onset and the 298 K value (reference README)
    assert record["hia_kcal_mol"] == pytest.approx(240.8, abs=1.8 + 2.0)


@pytest.mark.slow  # about 250 s on 2 cores: nine DFT single points on benzyl cations
def test_sigma_plus_correlation_of_para_benzyl_cations_after_dft_refinement():
    # Brown–Okamoto σ⁺ (H. C. Brown, Y. Okamoto, J. Am. Chem. Soc. 80, 4979 (1958), values from memory, in
    # sigma_plus.csv) against gas-phase HIA of the para-substituted benzyl cations: r ≥ 0.97 (the accuracy
    # goal of the refinement tier) with the expected sign (donors lower the HIA).  Raw GFN2-xTB gives r = 0.947
    # (strict xfail in test_checks); wB97X-D3BJ/def2-SVP single points on the same geometries gave r = 0.994 when
    # measured here, wB97X-D3BJ/def2-TZVP 0.994 in the gas phase and in ALPB(acetone) (benchmarks/sigma_plus_media.py).
    from scipy.stats import pearsonr

    from cationcalc.chem.reference import load_table
    from cationcalc.tasks.runner import run_task

    rows = load_table("sigma_plus")
    records = run_task("hia", [(r["benzyl_cation_smiles"], r["substituent"]) for r in rows], Settings(),
                       workers=2, refine="wB97X-D3BJ/def2-SVP")
    assert not any(r.get("error") for r in records)
    sigma = [float(r["sigma_plus"]) for r in rows]
    refined = pearsonr(sigma, [r["hia_kcal_mol"] for r in records])
    screening = pearsonr(sigma, [r["hia_xtb_kcal_mol"] for r in records])
    assert refined.statistic >= 0.97, refined.statistic
    assert refined.statistic > screening.statistic


# ------------------------------------------------------------------ DFT geometries (DFT//DFT)

def test_analytic_dft_gradient_matches_finite_differences_with_dispersion():
    # the forces DFT geometries are optimised on: analytic B3LYP-D3BJ gradient (dispersion included) against a
    # central difference of the energy, on the methyl cation displaced from its minimum; the residual is the
    # quadrature grid's, ~1e-6 Eh/bohr (common practice, no source)
    import numpy as np

    from cationcalc.engines.pyscf_engine import dft_energy_and_gradient

    numbers, positions = METHYL
    positions = np.asarray(positions, dtype=float)
    _, gradient, _ = dft_energy_and_gradient(numbers, positions, charge=1, multiplicity=1, xc="b3lyp-d3bj",
                                             basis="def2-svp")
    h = 1e-3
    for atom, axis in ((0, 2), (2, 0)):
        energies = []
        for sign in (1, -1):
            moved = positions.copy()
            moved[atom, axis] += sign * h
            energies.append(dft_single_point(numbers, moved, charge=1, multiplicity=1, xc="b3lyp-d3bj",
                                             basis="def2-svp").energy_hartree)
        numeric = (energies[0] - energies[1]) / (2 * h) * units.BOHR_ANGSTROM
        assert gradient[atom, axis] == pytest.approx(numeric, abs=2e-5)


@pytest.mark.slow  # a GFN2-xTB species and a DFT optimisation of 2-propyl
def test_dft_geometry_lowers_the_energy_at_its_own_level_and_is_labelled():
    # a structure optimised at the single point's own level cannot lie above the GFN2-xTB structure at that
    # level (variational minimum; common practice, no source); measured for 2-propyl at B3LYP-D3BJ/def2-SVP:
    # 0.9 kcal/mol lower
    settings = Settings()
    result = compute_one(species("C[CH+]C"), settings)
    on_xtb = refine_result(result, "B3LYP-D3BJ/def2-SVP", settings)
    on_dft = refine_result(result, "B3LYP-D3BJ/def2-SVP", settings, geometry=True)
    lowered = (on_xtb.E_hartree - on_dft.E_hartree) * units.HARTREE_TO_KCAL_MOL
    assert 0.05 < lowered < 5.0
    assert on_dft.level == "B3LYP-D3BJ/def2-SVP//B3LYP-D3BJ/def2-SVP (thermal: GFN2-xTB (gas))"
    assert on_dft.key != on_xtb.key and on_dft.positions_angstrom != result.positions_angstrom
    assert on_dft.profile.gradients["dft_gradient"] > 1
    # the thermal corrections stay GFN2-xTB's
    assert (on_dft.H_hartree - on_dft.E_hartree) == pytest.approx(result.H_hartree - result.E_hartree, abs=1e-12)


def test_refine_geometry_needs_refine(capsys):
    from cationcalc.cli.main import main

    assert main(["hia", "[CH3+]", "--refine-geometry"]) != 0
    assert "--refine-geometry needs --refine" in capsys.readouterr().err


@pytest.mark.slow  # DFT optimisations of methyl, methane, tert-butyl and isobutane (the anchor pair)
def test_refine_geometry_prints_its_cost_first(capsys):
    from cationcalc.cli.main import main

    assert main(["hia", "[CH3+]", "--refine=B3LYP-D3BJ/def2-SVP", "--refine-geometry", "--json",
                 "--workers", "1"]) == 0
    out = capsys.readouterr()
    assert "geometry at B3LYP-D3BJ/def2-SVP" in out.err and "gradients assumed" in out.err
    record = json.loads(out.out)[0]
    assert record["level"].startswith("B3LYP-D3BJ/def2-SVP//B3LYP-D3BJ/def2-SVP (thermal")
    assert "DFT//DFT" in record["refine_note"]


# ------------------------------------------------------------------ ranking across classes at the refined level

@pytest.fixture(scope="module")
def refined_ranking():
    """Gas HIA at the default refinement level (DFT//GFN2-xTB) of the cations the ranking checks compare."""
    from cationcalc.execution.refine import DEFAULT_LEVEL

    names = {"4-methoxybenzyl": "[CH2+]c1ccc(OC)cc1", "benzyl": "[CH2+]c1ccccc1", "2-propyl": "C[CH+]C",
             "allyl": "C=C[CH2+]", "2-propenyl": "C=[C+]C"}
    records = run_task("hia", [(s, n) for n, s in names.items()], Settings(), workers=2, refine=DEFAULT_LEVEL)
    assert not any(r.get("error") for r in records), records
    assert all(r["refine_level"] == DEFAULT_LEVEL for r in records)
    return {n: r for n, r in zip(names, records)}


@pytest.mark.slow  # five cation/adduct pairs and the anchor pair at wB97X-D3BJ/def2-TZVP, about 4 min on 2 cores
def test_pmb_cation_more_stable_than_tert_butyl_at_the_recommended_level(refined_ranking):
    # the level the README recommends for ranking across classes (--refine, wB97X-D3BJ/def2-TZVP//GFN2-xTB).
    # 4-Methoxybenzyl is more stable than tert-butyl in the gas phase (a para-methoxy group is among the strongest
    # cation donors: σ⁺(4-OMe) = −0.78, Brown and Okamoto, J. Am. Chem. Soc. 80, 4979 (1958), value from memory);
    # tert-butyl is the anchor, 236.7 kcal/mol (Keister, Riley, Baer 1993).  Raw GFN2-xTB gets this wrong
    # (238.1 against 236.7).
    pmb = refined_ranking["4-methoxybenzyl"]
    assert pmb["hia_kcal_mol"] < 236.7, pmb["hia_kcal_mol"]
    # the screening value that the refinement corrects stays in the record
    assert pmb["hia_xtb_kcal_mol"] != pmb["hia_kcal_mol"]


@pytest.mark.slow
def test_benzyl_below_2_propyl_and_allyl_below_2_propenyl_at_the_refined_level(refined_ranking):
    # gas HIA: benzyl 240.8 ± 1.8 (0 K onset; Torma, Voronova, Sztáray, Bodi, J. Phys. Chem. A 2019) below
    # 2-propyl 252.3 (bundled table, iPEPICO heat of formation, J. Phys. Chem. A 2010, 114, 11285); allyl
    # (J. Phys. Chem. A 2009, 113, 10710, bundled table) below the vinylic 2-propenyl (≈261, Lias et al.,
    # J. Phys. Chem. Ref. Data 1988, 17, Suppl. 1, recalled).  GFN2-xTB inverts both (benzyl/2-propyl compressed and inverted; 2-propenyl 19
    # kcal/mol below allyl).
    h = {n: r["hia_kcal_mol"] for n, r in refined_ranking.items()}
    assert h["benzyl"] < h["2-propyl"], h
    assert h["allyl"] < h["2-propenyl"], h


@pytest.mark.slow  # seven cation/adduct pairs at wB97X-D3BJ/def2-TZVP (1-adamantyl the largest), about 5 min
def test_refined_gas_hia_mae_at_the_default_level_on_the_298_k_rows():
    # every 298 K row of the bundled gas-phase table that is a minimum, not the anchor and not superseded (each
    # row names its publication: methyl, Houle and Beauchamp 1979 with read heats of formation; 2-propyl, iPEPICO,
    # J. Phys. Chem. A 2010, 114, 11285; allyl TPEPICO, J. Phys. Chem. A 2009, 113, 10710; acetyl, Fogleman et
    # al.; 1-adamantyl, Li and Baer, J. Phys. Chem. A 2002, 106, 272; CF3, Asher and Ruscic with CHF3 from the G2/97
    # set; HCO+, from the CO proton affinity).  Refined values take the nearest-class anchor (acetyl and HCO+ on
    # each other, the rest on tert-butyl).  Measured with benchmarks/dft_levels.py and class_anchors.py
    # (results/class_anchors.md): errors +0.87, +0.93, +0.60, -2.19, +0.36, +2.23, +2.19, MAE 1.34 kcal/mol at
    # wB97X-D3BJ/def2-TZVP//GFN2-xTB (2.89 with tert-butyl for every row) against 17 for raw GFN2-xTB.  The bound
    # is the measured MAE plus 0.2 kcal/mol for BLAS and thread-count noise of the structures (common practice,
    # no source); the 0 K onsets (benzyl, tropylium) are compared in the benchmark, converted with thermal
    # contents.
    from cationcalc.execution.refine import DEFAULT_LEVEL

    rows = [r for r in load_table("gas_hydride_ion_affinities")
            if float(r["T_K"]) > 0 and "threshold" not in r["name"] and not r["name"].startswith("tert-butyl")
            and "superseded" not in (r["notes"] or "")
            and r["name"] != "ethyl"]  # ethyl: bridged, the 1979 value 3–4 kcal/mol high (table note)
    assert len(rows) == 7
    records = run_task("hia", [(r["cation_smiles"], r["name"]) for r in rows], Settings(), workers=2,
                       refine=DEFAULT_LEVEL)
    errors = [rec["hia_kcal_mol"] - float(r["hia_kcal_mol"]) for rec, r in zip(records, rows)]
    mae = sum(abs(e) for e in errors) / len(errors)
    assert mae <= 1.34 + 0.2, errors
    anchors = {r["name"]: rec["reference"] for rec, r in zip(records, rows)}
    assert anchors["formyl HCO+"] == "acetyl" and anchors["acetyl (ATcT-based acetaldehyde)"] == "formyl HCO+"
    assert {a for n, a in anchors.items() if "acetyl" not in n and "HCO" not in n} == {"tert-butyl"}
    raw = sum(abs(rec["hia_xtb_kcal_mol"] - float(r["hia_kcal_mol"])) for rec, r in zip(records, rows)) / len(rows)
    assert raw > 2 * mae  # the refinement is what brings the error down (raw GFN2-xTB ≈ 17)
