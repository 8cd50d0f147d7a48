"""A batch survives whatever it is fed: bad inputs, engine failures, Ctrl-C, crashes while writing.

Each bad input sits in a batch with good ones and must give its own one-line
error while the others are computed.  (Parsing errors one by one are in
test_species.py, the CLI's usage errors in test_cli.py, workflow-file errors in
test_study.py; this file covers what those leave out.)
"""

import json
import os
import signal
from pathlib import Path

import numpy as np
import pytest

from cationcalc.cli.main import main
from cationcalc.chem.conformers import ConformerSettings, embed_conformers
from cationcalc.engines import EngineError, get_engine
from cationcalc.execution.executors import SpeciesFailure, compute_one
from cationcalc.compute.models import Settings
from cationcalc.compute.optimize import optimize
from cationcalc.compute.pipeline import ComputationError, compute_species
from cationcalc.chem.species import MAX_HEAVY_ATOMS, species
from store_probe import start_until_first_species, stored_species

ROOT = Path(__file__).resolve().parents[1]
FEW = ConformerSettings(max_conformers=2, n_optimize=1)


def _records(capsys) -> dict:
    return {r["input"]: r for r in json.loads(capsys.readouterr().out)}


def _one_line(message: str) -> bool:
    return bool(message) and "\n" not in message


# ---------------------------------------------------------------------------------------------
# bad inputs in a batch with good ones
# ---------------------------------------------------------------------------------------------

def test_every_kind_of_bad_cation_fails_alone_and_the_good_one_is_computed(capsys):
    huge = "C" * 299 + "[CH2+]"  # 300 heavy atoms
    bad = {
        "": "empty input",
        huge: f"above the limit of {MAX_HEAVY_ATOMS}",
        "C[Xe+]": "does not handle",          # unsupported element
        "C[U+](C)C": "does not handle",       # exotic element
        "C[C+]([CH2+])C": "net charge +2",    # dication
        "CCO": "not a monocation",            # a neutral where a cation is needed
    }
    code = main(["hia", *bad, "C[C+](C)C", "--json", "--workers", "1"])
    records = _records(capsys)
    assert code == 1  # some failed; the good one is still there
    for text, words in bad.items():
        error = records[text]["error"]
        assert words in error and _one_line(error), (text, error)
    assert "--force" in records[huge]["error"]  # the message says how to go past the limit
    good = records["C[C+](C)C"]
    assert "error" not in good and np.isfinite(good["hia_kcal_mol"])


def test_blank_lines_and_comments_in_an_input_file_are_skipped(tmp_path, capsys):
    path = tmp_path / "in.smi"
    path.write_text("\n   \n# a comment\nC[C+](C)C  tert-butyl\n\n", encoding="utf-8")
    assert main(["hia", "-i", str(path), "--json", "--workers", "1"]) == 0
    records = json.loads(capsys.readouterr().out)
    assert [r["name"] for r in records] == ["tert-butyl"]


def test_hydride_abstraction_from_a_molecule_without_c_h_is_refused_the_other_is_scanned(capsys):
    code = main(["sites", "--hydride", "ClC(Cl)(Cl)Cl", "C", "--json", "--no-shifts", "--workers", "1"])
    records = json.loads(capsys.readouterr().out)
    assert code == 1
    failed = [r for r in records if r["input"] == "ClC(Cl)(Cl)Cl"]
    assert len(failed) == 1 and "no C–H bond" in failed[0]["error"] and _one_line(failed[0]["error"])
    methane = [r for r in records if r["input"] == "C"]
    assert methane and all("error" not in r for r in methane)
    assert methane[0]["cation_smiles"] == "[CH3+]" and np.isfinite(methane[0]["hia_kcal_mol"])


# ---------------------------------------------------------------------------------------------
# engine failures
# ---------------------------------------------------------------------------------------------

def test_scf_that_never_converges_is_reported_for_that_species_only():
    hopeless = Settings(scf_max_iterations=1, conformers=FEW)
    failure = compute_one(species("[CH2+]c1ccccc1"), hopeless)
    assert isinstance(failure, SpeciesFailure)
    assert "did not converge after the retry ladder" in failure.message and _one_line(failure.message)
    # the cached engine of the worker is still usable for the next species
    ok = compute_one(species("[H][H]"), Settings(conformers=FEW))
    assert not isinstance(ok, SpeciesFailure) and ok.E_hartree < 0


def test_optimisation_at_the_step_limit_is_not_converged_and_says_how_far_it_got():
    mol, geometries = embed_conformers("CC(C)(C)Cl")
    numbers = [a.GetAtomicNum() for a in mol.GetAtoms()]
    start = geometries[0] + np.random.default_rng(3).normal(0.0, 0.05, geometries[0].shape)
    result = optimize(numbers, start, get_engine(), charge=0, multiplicity=1, fmax=0.01, max_steps=2)
    assert not result.converged
    assert result.max_force_ev_per_angstrom > 0.01 and result.n_gradients <= 4
    # in the pipeline such a result is never used: the species fails with the last force in the message
    with pytest.raises(ComputationError, match=r"did not converge in 2 steps \(last max force [0-9.]+ eV/Å"):
        compute_species(species("CC(C)(C)Cl"), Settings(max_steps=2, conformers=FEW))


def test_nan_from_the_engine_is_caught_and_fails_the_species(monkeypatch):
    from cationcalc.engines.tblite_engine import TBLiteEngine

    real = TBLiteEngine._converge
    calls = {"n": 0}

    class Poisoned:
        def __init__(self, res):
            self.res = res

        def get(self, key):
            value = self.res.get(key)
            return np.full_like(np.asarray(value, dtype=float), np.nan) if key == "energy" else value

    def poisoned(self):
        res, retry = real(self)
        calls["n"] += 1
        return (Poisoned(res) if calls["n"] == 3 else res), retry

    monkeypatch.setattr(TBLiteEngine, "_converge", poisoned)
    engine = get_engine()
    with pytest.raises(EngineError, match="non-finite"):
        for _ in range(3):
            engine.compute([1, 1], np.array([[0, 0, 0], [0, 0, 0.74]]), charge=0, multiplicity=1, solvent=None)
    calls["n"] = 0
    import cationcalc.execution.executors as executors

    monkeypatch.setattr(executors, "_ENGINES", {})
    failure = compute_one(species("CC"), Settings(conformers=FEW))
    assert isinstance(failure, SpeciesFailure) and "non-finite" in failure.message


# ---------------------------------------------------------------------------------------------
# Ctrl-C: what finished is printed and kept, the exit status is not 0, no temporary files remain
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("workers", [1, 2])
def test_ctrl_c_keeps_what_finished_and_leaves_no_temporary_files(tmp_path, workers):
    temp = tmp_path / "tmp"
    temp.mkdir()
    store = tmp_path / "store.sqlite"
    env = {**os.environ, "PYTHONPATH": str(ROOT), "TMPDIR": str(temp)}
    inputs = ["O", "C", "N", "CC(C)(C)Cl", "CCCCCCCCO", "CCOC(C)=O", "CCCCCCCC", "CC(C)CCCCO"]
    proc = start_until_first_species(["thermo", *inputs, "--json", "--workers", str(workers), "--store", str(store)],
                                     store, env)
    proc.send_signal(signal.SIGINT)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    assert "interrupted" in err
    records = json.loads(out)
    finished = [r for r in records if "error" not in r]
    assert len(records) == len(inputs) and 1 <= len(finished) < len(inputs)
    assert all("interrupted" in r["error"] for r in records if "error" in r)
    assert stored_species(store) >= len(finished)  # everything printed as finished is in the store
    assert sorted(p.name for p in temp.iterdir()) == []  # the temp folder is as it was before
    # beside the store (and SQLite's own WAL files) nothing was left in the working folder
    assert {p.name for p in tmp_path.iterdir()} <= {"store.sqlite", "store.sqlite-shm", "store.sqlite-wal", "tmp"}


# ---------------------------------------------------------------------------------------------
# atomic writes
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("where", ["fsync", "replace"])
def test_a_crash_while_writing_leaves_the_old_file_whole_and_no_temporary_file(tmp_path, monkeypatch, where):
    from cationcalc.report import files as report

    path = tmp_path / "results.json"
    path.write_bytes(b'{"old": true}\n')

    def crash(*args, **kwargs):
        raise KeyboardInterrupt  # as a Ctrl-C or a kill would, half-way

    monkeypatch.setattr(report.os, where, crash)
    with pytest.raises(KeyboardInterrupt):
        report.write_atomic(path, b'{"new": true, "padding": "' + b"x" * 100000 + b'"}\n')
    assert path.read_bytes() == b'{"old": true}\n'
    assert [p.name for p in tmp_path.iterdir()] == ["results.json"]
    monkeypatch.undo()
    assert report.write_atomic(path, b"new\n") and path.read_bytes() == b"new\n"
    assert [p.name for p in tmp_path.iterdir()] == ["results.json"]
