"""The fast path: the site funnel, the shift funnel, Hessians on the lowest conformer only, --thorough.

The chemistry the funnel must not change is the textbook order of sites (benzylic tertiary before
tertiary alkyl before primary; common practice, no source) and the full protocol's numbers within the
budget the drug-like benchmark states (0.3 kcal/mol on ΔG_ion; benchmarks/druglike.py).
"""

from __future__ import annotations

import json

import pytest

from cationcalc.chem.species import species
from cationcalc.compute.models import Settings, species_key
from cationcalc.compute.pipeline import TRANSFERRED_NOTE, compute_species
from cationcalc.tasks.funnel import inside_window, site_score
from cationcalc.tasks.runner import run_task

#: a tertiary and a primary benzylic chloride in one substrate (the sites cannot reach each other)
TWO_SITES = "ClCc1ccc(cc1)C(C)(C)Cl"


def test_site_score_is_products_minus_reactants():
    assert site_score({"cation": -100.0, "departing": -50.0, "substrate": -160.0}) == pytest.approx(10.0)
    assert site_score({"cation": -100.0, "adduct": -101.0}) == pytest.approx(1.0)


def test_window_keeps_the_best_and_those_close_to_it():
    assert inside_window({"a": 3.0, "b": 0.0, "c": 8.01}, 8.0) == ["a", "b"]
    assert inside_window({"a": 3.0}, 0.0) == ["a"]


@pytest.fixture(scope="module")
def two_site_runs():
    settings = Settings(solvent="water")
    funnelled = run_task("ionize", [(TWO_SITES, "")], settings, shifts=False, site_window_kcal_mol=2.0)[0]
    full = run_task("ionize", [(TWO_SITES, "")], settings, shifts=False, site_window_kcal_mol=None)[0]
    return funnelled, full


def test_the_funnel_computes_the_tertiary_site_and_screens_out_the_primary_one(two_site_runs):
    funnelled, full = two_site_runs
    # a tertiary benzylic chloride ionizes before a primary benzylic one (common practice, no source)
    assert funnelled["cation_smiles"] == full["cation_smiles"] == "C[C+](C)c1ccc(CCl)cc1"
    assert funnelled["dG_ion_kcal_mol"] == full["dG_ion_kcal_mol"]
    (other,) = funnelled["alternatives"]
    assert other["screened"] is True and other["dG_ion_kcal_mol"] is None and other["verdict"] == "screened out"
    assert other["screen_gap_kcal_mol"] > 2.0
    assert funnelled["screen_gap_kcal_mol"] == 0.0 and "dE_ion_screen_kcal_mol" in funnelled
    (computed,) = full["alternatives"]
    assert computed["dG_ion_kcal_mol"] > full["dG_ion_kcal_mol"] and "screened" not in computed


def test_sites_lists_the_screened_site_after_the_ranked_ones():
    records = run_task("sites", [(TWO_SITES, "")], Settings(solvent="water"), shifts=False, site_window_kcal_mol=2.0)
    assert [r.get("screened") for r in records] == [None, True]
    assert records[0]["rank"] == 1 and records[1].get("rank") is None
    assert "outside the site window" in records[1]["verdict_reason"]


def test_a_primary_site_is_outranked_whatever_its_screening_energy():
    """An unstabilized primary cation never wins over a tertiary one (common practice, no source)."""
    record = run_task("ionize", [("CC(C)(Cl)CCCl", "")], Settings(solvent="water"), shifts=False)[0]
    assert record["cation_smiles"] == "C[C+](C)CCCl"
    (other,) = record["alternatives"]
    assert other["screened"] is True and other["cation_smiles"] == "[CH2+]CC(C)(C)Cl"


def test_hessian_on_the_lowest_conformer_stays_within_the_budget_of_the_full_protocol():
    sp = species("CCCC[C+](C)C")
    full = compute_species(sp, Settings().model_copy(update={"hessian_conformers": "all"}))
    fast = compute_species(sp, Settings())
    assert abs(fast.G_hartree - full.G_hartree) * 627.5095 < 0.3
    assert fast.profile.gradients["hessian"] < full.profile.gradients["hessian"]
    assert any(c.note == TRANSFERRED_NOTE for c in fast.conformers)


def test_the_screening_level_has_no_hessian_and_energies_only():
    result = compute_species(species("CC[C+](C)C"), Settings().screening())
    assert result.profile.gradients.get("hessian", 0) == 0
    assert result.H_hartree == pytest.approx(result.E_hartree) and result.zpe_kcal_mol == 0.0


def test_the_full_protocol_keeps_the_store_keys_of_results_computed_before_the_fast_path():
    """Results stored before hessian_conformers existed were computed with a Hessian on every conformer and LBFGS."""
    before = Settings(optimizer="LBFGS").model_dump(mode="json")
    before.pop("hessian_conformers")
    before["conformers"].pop("centre_torsion_steps")  # added later still: never in a non-carbocation's key
    before.pop("hessian_difference")  # added later still: central by default, left out of the key
    import hashlib

    from cationcalc.about import __version__

    payload = {"smiles": "C", "charge": 0, "multiplicity": 1, "settings": before, "version": __version__}
    old_key = hashlib.sha256(json.dumps(payload, sort_keys=True).encode()).hexdigest()
    assert species_key("C", 0, 1, Settings().full_protocol()) == old_key
    assert species_key("C", 0, 1, Settings()) != old_key


def test_thorough_on_the_command_line_is_the_full_protocol(capsys):
    from cationcalc.cli.main import _options, _settings, build_parser
    from cationcalc.tasks.registry import spec

    args = build_parser().parse_args(["ionize", "CC(C)(C)Cl", "--thorough"])
    assert _settings(args).hessian_conformers == "all" and _settings(args).optimizer == "LBFGS"
    options = _options(args, spec("ionize"))
    assert options["site_window_kcal_mol"] is None and options["shift_window_kcal_mol"] is None
    args = build_parser().parse_args(["sites", "CC(C)(C)Cl", "--site-window", "none", "--shift-window", "3"])
    assert _options(args, spec("sites"))["site_window_kcal_mol"] is None
    assert _options(args, spec("sites"))["shift_window_kcal_mol"] == 3.0


def test_a_negative_window_is_refused_in_one_line(capsys):
    from cationcalc.cli.main import main

    assert main(["ionize", "CC(C)(C)Cl", "--site-window", "-3"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert "--site-window" in err[-1] and "0 or more" in err[-1]
