"""What a chemist reads: the short terminal view, the report's answer per substrate (issue 17, points 1, 2, 5, 9, 10).

Records here are built by hand in the shape the tasks produce (invented values, for layout only);
the chemistry behind the values is tested in test_ionization.py and test_shifts.py.
"""

import re

from cationcalc.cli.main import _print_view, build_parser
from cationcalc.report.columns import VIEWS, Column, cell, note, view

LONG_CATION = "[CH2+]c1ccc([N+](=O)[O-])cc1C(=O)OC(C)(C)Cc1ccc(OC)cc1"  # invented, longer than a cell


def _ionize_records():
    return [
        {"task": "ionize", "name": "4-nitrobenzyl chloride", "input": "ClCc1ccc([N+](=O)[O-])cc1",
         "cation_smiles": "[CH2+]c1ccc([N+](=O)[O-])cc1", "site_atom": 1, "equivalent_atoms": [1],
         "leaving_group": "chloride", "dG_ion_kcal_mol": 25.31, "dG_ion_uncertainty_kcal_mol": 17.6,
         "ddG_ion_vs_tert_butyl_kcal_mol": 7.3, "ddG_ion_vs_tert_butyl_uncertainty_kcal_mol": 5.1,
         "verdict": "SN1/E1 plausible", "verdict_reason": "r",
         "warnings": ["broke C1-H6; formed C0-H6", "27i cm-1 remain after 3 displacements", "third"],
         "rearrangement": "no downhill 1,2-shift", "level": "GFN2-xTB/ALPB(water)", "temperature_k": 298.15,
         "standard_state": "1 mol/L (solution)", "equilibrium_note": "equilibrium", "solvation_note": "",
         "reference_substrate": "CC(C)(C)Cl"},
        {"task": "ionize", "name": "", "input": "long", "cation_smiles": LONG_CATION, "site_atom": 2,
         "leaving_group": "tosylate", "dG_ion_kcal_mol": 12.0, "ddG_ion_vs_tert_butyl_kcal_mol": -1.0,
         "verdict": "SN1/E1 plausible", "verdict_reason": "r", "warnings": [], "rearrangement": "",
         "level": "GFN2-xTB/ALPB(water)", "standard_state": "1 mol/L (solution)", "equilibrium_note": "e",
         "solvation_note": "", "reference_substrate": "CC(C)(C)Cl"},
    ]


def test_default_ionize_view_is_short_and_never_splits_a_smiles(capsys):
    records = _ionize_records()
    _print_view("ionize", records)
    out = capsys.readouterr().out
    lines = out.splitlines()
    header_block = "\n".join(lines[:8])
    for word in ("substrate", "cation", "ΔG_ion", "kcal/mol", "verdict", "note"):
        assert word in header_block
    assert "dG_ion_kcal_mol" not in out  # headers in words, not raw keys
    # the whole SMILES on one line, or a prefix ending in … on one line: never a fragment such as ")cc1"
    assert any("[CH2+]c1ccc([N+](=O)[O-])cc1" in line for line in lines)
    assert any(re.search(re.escape(LONG_CATION[:20]) + r"[^ │]*…", line) for line in lines)
    assert not any(line.strip("│ ").startswith((")", "cc1")) for line in lines)
    # diagnostics are counted, their text stays in JSON
    assert "3 notes" in out and "27i cm-1" not in out and "broke C1-H6" not in out
    body = [line for line in lines if line.startswith("│")]
    assert body and max(line.count("│") for line in body) - 1 <= 9  # at most nine columns


def test_wide_option_and_views_per_task():
    args = build_parser().parse_args(["ionize", "CC(C)(C)Cl", "--wide"])
    assert args.wide
    for task in ("hia", "ionize", "sites", "ladder"):
        headers = [c.header for c in VIEWS[task]]
        assert all(not re.fullmatch(r"[a-z_]+_(kcal_mol|kJ_mol)", h) for h in headers)
        assert len(headers) <= 11
    scan = {"name": "x", "rank": 1, "site_atom": 1, "leaving_group": "chloride", "cation_smiles": "C[C+](C)C",
            "dG_ion_kcal_mol": 1.0, "dG_ion_vs_best_kcal_mol": 0.0, "verdict": "v", "rearrangement": "r"}
    assert len(view("sites", [scan])) <= 9  # a leaving-group scan shows no HIA columns
    # a new task is one more entry (the kinetics task adds its own in the same way)
    extended = {**VIEWS, "demo": (Column("k_demo_per_s", "k (s⁻¹)", "factor"),)}
    assert cell(extended["demo"][0], {"k_demo_per_s": 1234.5}) == "1.2e+03"
    assert note({"warnings": ["a"], "rearranged": True, "relaxed_cation_smiles": "C[C+](C)C"}) == \
        "relaxed to C[C+](C)C; 1 note"
    assert [c.key for c in view("ionize", [{"dG_ion_kcal_mol": 1.0}])] == ["substrate", "dG_ion_kcal_mol"]


def test_charge_cards_draw_the_relaxed_structure_and_the_centres_own_charge(gas):
    # 1-propyl cation relaxes to 2-propyl at GFN2-xTB (a 1,2-H shift; DEVELOPERS.md, measured); a
    # carbenium centre carries the largest positive charge of the carbons (common practice, no source)
    from rdkit import Chem

    from cationcalc.compute.pipeline import compute_species
    from cationcalc.report.figures import depiction_png, drawn_structure
    from cationcalc.report.html import _centre_text
    from cationcalc.chem.species import species

    propyl = compute_species(species("CC[CH2+]"), gas)
    assert propyl.rearranged
    mol, relaxed = drawn_structure(propyl)
    assert relaxed and Chem.MolToSmiles(mol) == "C[CH+]C"  # drawn as it relaxed, + on the middle carbon
    own = propyl.partial_charges
    assert own[1] == max(own[:3])  # the relaxed centre's own charge is the largest: the centre reads as centre
    tert_butyl = compute_species(species("C[C+](C)C"), gas)
    q = tert_butyl.partial_charges
    assert q[1] > max(q[0], q[2], q[3])
    assert "own charge" in _centre_text(tert_butyl) and "group charge" in _centre_text(tert_butyl)
    assert depiction_png(propyl)[:4] == b"\x89PNG"


def test_charge_palette_is_the_projects_own():
    from cationcalc.report.figures import CHARGE_COLOURS, CHARGE_SCALE, _charge_colour

    assert CHARGE_COLOURS == ("#13706b", "#ffffff", "#d97a00")
    r, g, b = _charge_colour(CHARGE_SCALE)
    assert (round(r * 255), round(g * 255), round(b * 255)) == (0xd9, 0x7a, 0x00)  # amber: positive
    assert min(_charge_colour(0.0)) > 0.99  # white at zero (colormap sampling: within one 8-bit step)
    r, g, b = _charge_colour(-CHARGE_SCALE)
    assert (round(r * 255), round(g * 255), round(b * 255)) == (0x13, 0x70, 0x6b)  # teal: negative


def test_citations_are_citations_and_status_is_a_separate_field():
    # a printed citation names authors, journal, year, volume and page; how it was checked lives in
    # `status` (read / derived / recalled) and `verification`, never in the citation text
    import csv
    from importlib import resources

    from cationcalc.checks.trends import _trend
    from cationcalc.chem.reference import hia_reference, load_table

    banned = ("from memory", "recalled", "not verified", "this session", "copied from", "shared/", "abstract")
    folder = resources.files("cationcalc") / "data"
    checked = 0
    for path in folder.iterdir():
        if not path.name.endswith(".csv"):
            continue
        rows = list(csv.DictReader(path.open(encoding="utf-8")))
        if not rows or "status" not in rows[0] or "source" not in rows[0]:
            continue
        for row in rows:
            assert not any(b in row["source"].lower() for b in banned), (path.name, row["source"])
            assert row["status"] in ("read", "derived", "recalled"), (path.name, row["status"])
            assert "verification" in row
            checked += 1
    assert checked > 50
    anchor = hia_reference("tert-butyl")
    assert anchor.source.startswith("Keister, J. W.; Riley, J. S.; Baer, T.") and "1993" in anchor.source
    assert anchor.status == "derived"
    noyce = load_table("solvolysis_leaving_groups")[0]
    assert noyce["source"] == "Noyce, D. S.; Virgilio, J. A. J. Org. Chem. 1972, 37, 2643"
    assert noyce["status"] == "recalled"
    assert "status" in _trend("x", "y", "z", "w", "source", True)


def test_rank_gaps_carry_the_error_of_a_same_class_difference():
    # the error of a difference between two alkyl cations comes from pairs of alkyl reference cations
    # (bundled gas-phase HIA residuals, each row with its published source); the shared bias cancels
    import csv
    import itertools
    import math
    from importlib import resources

    from cationcalc.compute.models import Settings
    from cationcalc.trust.uncertainty import annotate

    path = resources.files("cationcalc") / "data" / "calibration_residuals.csv"
    rows = [r for r in csv.DictReader(path.open(encoding="utf-8")) if r["calibration_id"].startswith("GFN2-xTB (gas)")]
    alkyl = [float(r["raw_residual_kcal_mol"]) for r in rows if r["class_group"] == "alkyl"]
    assert len(alkyl) >= 3
    pairs = [a - b for a, b in itertools.product(alkyl, repeat=2)]  # every ordered pair, as documented
    expected = math.sqrt(sum(d * d for d in pairs) / len(pairs))
    records = [
        {"task": "sites", "input": "CCC(C)C(C)C", "rank": 1, "cation_smiles": "CC[C+](C)C(C)C", "cation_class": "tertiary",
         "hia_kcal_mol": 240.0, "hia_vs_best_kcal_mol": 0.0, "warnings": []},
        {"task": "sites", "input": "CCC(C)C(C)C", "rank": 2, "cation_smiles": "C[CH+]C(C)C(C)C",
         "cation_class": "secondary", "hia_kcal_mol": 250.0, "hia_vs_best_kcal_mol": 10.0, "warnings": []},
    ]
    out = annotate("sites", records, Settings())
    gap = out[1]
    assert gap["hia_vs_best_uncertainty_kcal_mol"] == round(expected, 1)
    assert gap["hia_vs_best_uncertainty_kcal_mol"] < gap["hia_uncertainty_kcal_mol"]
    assert "alkyl pairs" in gap["hia_vs_best_uncertainty_basis"] and "bias" in gap["hia_vs_best_uncertainty_basis"]


def test_site_tiers_follow_the_gap_and_its_error():
    # project's own tier limits: 1.4 kcal/mol (factor 10 in K at 298 K) and 4.1 kcal/mol (factor 1000),
    # RT ln 10 = 1.36 kcal/mol at 298.15 K (common practice, no source)
    from cationcalc.chem import units
    from cationcalc.report.columns import SITE_TIERS, site_tier

    assert SITE_TIERS[0][1] == round(units.rt_kcal_mol(298.15) * 2.302585, 1)
    assert SITE_TIERS[1][1] == round(3 * units.rt_kcal_mol(298.15) * 2.302585, 1)
    assert site_tier({"dG_ion_vs_best_kcal_mol": 0.0}) == "leading"
    assert site_tier({"dG_ion_vs_best_kcal_mol": 2.0, "dG_ion_vs_best_uncertainty_kcal_mol": 0.3}) == "competing"
    assert site_tier({"dG_ion_vs_best_kcal_mol": 2.0, "dG_ion_vs_best_uncertainty_kcal_mol": 2.5}) == "leading"
    assert site_tier({"hia_vs_best_kcal_mol": 9.0, "hia_vs_best_uncertainty_kcal_mol": 1.0}) == "minor"
