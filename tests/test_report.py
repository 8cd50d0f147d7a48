"""Study outputs: report.html self-contained, provenance in every file, structures, charges, ladder."""

import base64
import hashlib
import html
import json
import re
import textwrap

import numpy as np
import pytest

from cationcalc.about import SAFETY_NOTE
from cationcalc.chem import units
from cationcalc.report.figures import heavy_atom_charges, ladder_figure
from cationcalc.execution.store import ResultStore
from cationcalc.studies.workflow import run_study

STUDY = """
    study: report-check
    description: two cations and water, for the report tests
    species:
      - {smiles: "C[C+](C)C", name: tert-butyl, tasks: [hia]}
      - {smiles: "[CH2+]c1ccccc1", name: benzyl, tasks: [hia]}
      - {smiles: "O", name: water, tasks: [thermo]}
    tasks: [hia, thermo]
    conformers: {max_conformers: 4}
    output: {folder: out}
    execution: {workers: 1}
"""


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    path = folder / "study.yaml"
    path.write_text(textwrap.dedent(STUDY).lstrip())
    outcome = run_study(path)
    assert outcome.failed == 0
    return folder, path, outcome


def test_report_html_is_self_contained_with_table_images_and_provenance(study):
    folder, path, outcome = study
    text = (folder / "out" / "report.html").read_text(encoding="utf-8")
    assert "http://" not in text and "https://" not in text
    assert not re.findall(r'(?:src|href)="(?!data:image/png;base64,)', text)  # nothing fetched from anywhere
    images = re.findall(r'src="data:image/png;base64,([^"]+)"', text)
    assert len(images) >= 4  # ladder, colour scale, two cations
    assert all(base64.b64decode(i).startswith(b"\x89PNG\r\n\x1a\n") for i in images)
    assert "<table>" in text and "<td>tert-butyl</td>" in text and "<td>benzyl</td>" in text
    hia = [r for r in outcome.records if r["task"] == "hia"]
    for r in hia:
        assert f'<td class="num">{r["hia_kcal_mol"]}</td>' in text and f'<td class="num">{r["hia_kJ_mol"]}</td>' in text
    assert html.escape(SAFETY_NOTE) in text
    assert hashlib.sha256(path.read_bytes()).hexdigest() in text
    assert html.escape(path.read_text()) in text  # the workflow file itself
    assert "summed onto the heavy atom" in text


def test_every_output_file_carries_the_workflow_hash_and_versions(study):
    folder, path, outcome = study
    digest = hashlib.sha256(path.read_bytes()).hexdigest()
    out = folder / "out"
    results = json.loads((out / "results.json").read_text())
    assert results["provenance"]["workflow_sha256"] == digest
    assert results["provenance"]["versions"]["cationcalc"] and results["provenance"]["versions"]["rdkit"]
    assert results["records"] == outcome.records
    assert [r["task"] for r in results["records"]] == ["hia", "hia", "thermo"]
    lines = (out / "results.csv").read_text().splitlines()
    assert lines[0].startswith("# cationcalc") and digest in lines[0] and "rdkit=" in lines[0]
    assert lines[1].startswith("task,") and len(lines) == 2 + len(outcome.records)
    sdf = (out / "structures.sdf").read_text()
    assert sdf.count("$$$$") == 5  # tBu+, isobutane, benzyl+, toluene, water
    assert sdf.count(f"{digest}") == 5
    xyz = sorted((out / "xyz").glob("*.xyz"))
    assert len(xyz) == 5 and all(digest in p.read_text().splitlines()[1] for p in xyz)


def test_structures_are_the_stored_geometries(study):
    from ase.io import read
    from rdkit import Chem

    folder, _, _ = study
    with ResultStore(folder / "out" / "store.sqlite") as store:
        stored = {r.smiles: r for r in store.results(store.keys())}
    for mol in Chem.SDMolSupplier(str(folder / "out" / "structures.sdf"), removeHs=False):
        r = stored[mol.GetProp("smiles")]
        assert mol.GetNumAtoms() == len(r.numbers)
        assert float(mol.GetProp("E_hartree")) == pytest.approx(r.E_hartree, abs=1e-8)
        assert np.allclose(mol.GetConformer().GetPositions(), r.positions_angstrom, atol=1e-4)
    for path in (folder / "out" / "xyz").glob("*.xyz"):
        atoms = read(path, format="extxyz")
        r = stored[atoms.info["smiles"]]
        assert atoms.get_atomic_numbers().tolist() == r.numbers
        assert np.allclose(atoms.positions, r.positions_angstrom, atol=1e-6)


def test_depicted_charges_show_benzyl_delocalization(study):
    folder, _, _ = study
    with ResultStore(folder / "out" / "store.sqlite") as store:
        benzyl = next(r for r in store.results(store.keys()) if r.smiles == "[CH2+]c1ccccc1")
    q = heavy_atom_charges(benzyl)  # atom order of [CH2+]c1ccccc1: CH2, ipso, ortho, meta, para, meta, ortho
    assert sum(q) == pytest.approx(1.0, abs=1e-3)
    assert len(q) == 7
    ortho, meta, para = q[2], q[3], q[4]
    assert q[2] == pytest.approx(q[6], abs=0.01) and q[3] == pytest.approx(q[5], abs=0.01)
    assert para > meta and ortho > meta  # the positive charge sits on ortho and para carbons
    assert q[0] == max(q)


def test_ladder_sorts_by_value_and_draws_error_bars_only_when_given():
    records = [{"task": "hia", "name": "a", "solvent": "none", "hia_kcal_mol": 250.0},
               {"task": "hia", "name": "b", "solvent": "none", "hia_kcal_mol": 230.0},
               {"task": "hia", "name": "c", "solvent": "none", "hia_kcal_mol": 240.0},
               {"task": "hia", "name": "d", "solvent": "none", "error": "no result"}]
    fig = ladder_figure(records, "hia_kcal_mol")
    ax = fig.axes[0]
    assert [t.get_text() for t in ax.get_yticklabels()] == ["b", "c", "a"]
    assert not ax.containers[0].has_xerr
    top = next(child for child in ax.get_children() if child.__class__.__name__ == "SecondaryAxis")
    assert top._functions[0](100.0) == pytest.approx(100.0 * units.KCAL_TO_KJ)
    with_errors = [dict(r, hia_uncertainty_kcal_mol=3.0) for r in records[:3]]
    fig = ladder_figure(with_errors, "hia_kcal_mol")
    bars = fig.axes[0].containers[0]
    assert bars.has_xerr
    segments = bars.lines[2][0].get_segments()
    assert sorted(round(s[1][0] - s[0][0], 6) for s in segments) == [6.0, 6.0, 6.0]
    assert ladder_figure([records[3]], "hia_kcal_mol") is None
