"""Optimisation prints nothing: what ASE's optimisers log, warn or print is kept in the result's notes."""

from __future__ import annotations

import os
import pathlib
import subprocess
import sys

import numpy as np
import pytest

from cationcalc.chem.conformers import embed_conformers
from cationcalc.compute.optimize import OPTIMIZERS, optimize
from cationcalc.engines import get_engine
from cationcalc.engines.base import EngineCounters, EngineResult, SCFConvergenceError

ROOT = pathlib.Path(__file__).resolve().parent.parent
WATER = dict(charge=0, multiplicity=1, solvent="water")


def _start(smiles):
    mol, geometries = embed_conformers(smiles)
    return [a.GetAtomicNum() for a in mol.GetAtoms()], geometries[0]


SILENT_RUN = """
import sys
from cationcalc.chem.conformers import embed_conformers
from cationcalc.compute.optimize import OPTIMIZERS, optimize
from cationcalc.engines import get_engine

def start(smiles):
    mol, geometries = embed_conformers(smiles)
    return [a.GetAtomicNum() for a in mol.GetAtoms()], geometries[0]

water = dict(charge=0, multiplicity=1, solvent="water")
for name in OPTIMIZERS:
    assert optimize(*start("CC(C)(C)Cl"), get_engine(), optimizer=name, **water).converged, name
notes = optimize(*start("CCOCC"), get_engine(), optimizer="PreconLBFGS", fmax=1e-5, **water).notes
sys.exit(0 if any("not downhill" in n for n in notes) else 3)
"""


def test_optimisation_prints_nothing_in_a_fresh_interpreter():
    # no test harness catching logs or warnings in between: exactly what the command line sees.
    # Measured before: the diethyl ether run wrote "Passed direction which is not downhill. Aborting...:
    # 1.474518e-11" and "UserWarning: Armijo linesearch failed, resetting Hessian and trying again" to
    # standard error (standard output stayed empty with ASE 3.29; print() or a logging handler on stdout
    # would have put them there)
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    run = subprocess.run([sys.executable, "-c", SILENT_RUN], capture_output=True, text=True, env=env, timeout=300)
    assert (run.returncode, run.stdout, run.stderr) == (0, "", "")


@pytest.mark.parametrize("optimizer", sorted(OPTIMIZERS))
def test_every_optimizer_is_silent_on_a_small_molecule(optimizer, capfd, caplog, recwarn):
    numbers, start = _start("CC(C)(C)Cl")
    result = optimize(numbers, start, get_engine(), optimizer=optimizer, **WATER)
    assert result.converged
    assert capfd.readouterr() == ("", "") and not caplog.records and not recwarn.list


def test_line_search_messages_become_notes_not_output(capfd, caplog, recwarn):
    # measured before: PreconLBFGS on diethyl ether to 1e-5 eV/Å (below the SCF noise) logged
    # "Passed direction which is not downhill. Aborting...: 1.47e-11" and warned "Armijo linesearch failed,
    # resetting Hessian and trying again"
    numbers, start = _start("CCOCC")
    result = optimize(numbers, start, get_engine(), optimizer="PreconLBFGS", fmax=1e-5, **WATER)
    assert capfd.readouterr() == ("", "") and not caplog.records and not recwarn.list
    assert any("not downhill" in note for note in result.notes)
    assert any("Armijo linesearch failed" in note for note in result.notes)


def test_a_line_search_that_gives_up_is_continued_by_lbfgs(capfd):
    # measured before: PreconLBFGS on tert-butyl chloride to 1e-5 eV/Å raised
    # RuntimeError("Armijo linesearch failed after reset of Hessian, aborting") after 116 steps
    numbers, start = _start("CC(C)(C)Cl")
    engine = get_engine()
    result = optimize(numbers, start, engine, optimizer="PreconLBFGS", fmax=1e-5, max_steps=300, **WATER)
    assert capfd.readouterr() == ("", "")
    assert any("gave up" in note and "continued with LBFGS" in note for note in result.notes)
    assert result.n_gradients == engine.counters.calls
    # the continuation goes on optimising instead of aborting: from 0.9 eV/Å at the start to below the pipeline's
    # own convergence criterion (0.01 eV/Å).  1e-5 itself is below the gradient noise: measured with MKL
    # (MKL_CBWR=AUTO), the continued run ends at 1.8e-3 and plain LBFGS from the same start at 3.3e-4 after
    # 300 steps, neither converged; an earlier bound of 1e-3 held only on one numerical path
    assert result.max_force_ev_per_angstrom < 0.01


class FailingEngine:
    """Harmonic toy engine whose SCF fails from the fourth call on: a trial step of the line search
    (after the start and the preconditioner's own probe)."""

    name, method, solvent_model = "toy", "toy", "none"

    def __init__(self):
        self.counters = EngineCounters()

    def compute(self, numbers, positions_angstrom, *, charge, multiplicity, solvent):
        self.counters.calls += 1
        pos = np.asarray(positions_angstrom, dtype=float)
        if self.counters.calls >= 4:
            raise SCFConvergenceError("toy SCF failure")
        return EngineResult(float(((pos - 1.0) ** 2).sum()), -2 * (pos - 1.0), np.zeros(len(pos)))


def test_an_engine_error_inside_the_line_search_is_raised_as_itself():
    # ASE's line search catches the RuntimeError, resets its Hessian, fails again and raises
    # "Armijo linesearch failed after reset of Hessian" (measured): the SCF failure must come out instead
    start = np.array([[0.0, 0.1, 0.0], [0.0, 0.3, 1.5], [1.2, -0.2, 0.0]])
    with pytest.raises(SCFConvergenceError, match="toy SCF failure"):
        optimize([6, 6, 6], start, FailingEngine(), optimizer="PreconLBFGS", **WATER)


def test_lbfgs_result_has_no_notes():
    numbers, start = _start("CCO")
    assert optimize(numbers, start, get_engine(), **WATER).notes == ()
