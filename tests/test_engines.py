"""Two independent builds of GFN2-xTB agree; SCF failures are retried, then reported."""

import numpy as np
import pytest

from cationcalc.chem.conformers import embed_conformers
from cationcalc.engines import SCFConvergenceError, UnknownSolventError, get_engine
from cationcalc.chem.units import HARTREE_EV


@pytest.mark.parametrize("smiles, charge", [("C[C+](C)C", 1), ("CC(C)(C)Cl", 0), ("CC(=O)[O-]", -1)])
def test_tblite_and_xtb_python_agree_on_gas_phase_energy(smiles, charge):
    # same published method (Bannwarth, Ehlert, Grimme, JCTC 15, 1652 (2019)), two builds: agree to 1e-5 Eh
    pytest.importorskip("xtb.interface")
    mol, geometries = embed_conformers(smiles)
    numbers = [a.GetAtomicNum() for a in mol.GetAtoms()]
    energies = []
    for name in ("tblite", "xtb"):
        result = get_engine(name).compute(numbers, geometries[0], charge=charge, multiplicity=1, solvent=None)
        energies.append(result.energy_ev / HARTREE_EV)
    assert abs(energies[0] - energies[1]) < 1e-5


def test_charge_is_really_applied():
    # the cation must not silently come out neutral (a known xtb-python ASE-calculator trap)
    mol, geometries = embed_conformers("C[C+](C)C")
    numbers = [a.GetAtomicNum() for a in mol.GetAtoms()]
    for name in ("tblite", "xtb"):
        try:
            engine = get_engine(name)
        except ImportError:
            continue
        cation = engine.compute(numbers, geometries[0], charge=1, multiplicity=1, solvent=None)
        neutral_like = engine.compute(numbers, geometries[0], charge=-1, multiplicity=1, solvent=None)
        assert abs(cation.energy_ev - neutral_like.energy_ev) > 1.0
        assert cation.charges.sum() == pytest.approx(1.0, abs=1e-6)


def test_unknown_solvent_is_refused_not_run_in_gas_phase():
    with pytest.raises(UnknownSolventError):
        get_engine("tblite").compute([1, 1], np.array([[0, 0, 0], [0, 0, 0.74]]), charge=0, multiplicity=1,
                                     solvent="ethanol-water")
    try:
        engine = get_engine("xtb")
    except ImportError:
        return
    with pytest.raises(UnknownSolventError):  # ALPB-only solvent has no GBSA parameters
        engine.compute([1, 1], np.array([[0, 0, 0], [0, 0, 0.74]]), charge=0, multiplicity=1, solvent="ethanol")


def test_scf_failure_walks_the_retry_ladder_then_reports():
    mol, geometries = embed_conformers("[CH2+]c1ccccc1")
    numbers = [a.GetAtomicNum() for a in mol.GetAtoms()]
    engine = get_engine("tblite", max_iterations=1)
    with pytest.raises(SCFConvergenceError, match="retry ladder"):
        engine.compute(numbers, geometries[0], charge=1, multiplicity=1, solvent=None)
    # a moderately short cap converges on a retry and says so
    engine = get_engine("tblite", max_iterations=4)
    result = engine.compute(numbers, geometries[0], charge=1, multiplicity=1, solvent=None)
    reference = get_engine("tblite").compute(numbers, geometries[0], charge=1, multiplicity=1, solvent=None)
    assert result.scf_retry != "" and engine.counters.scf_retries >= 1
    assert result.energy_ev == pytest.approx(reference.energy_ev, abs=1e-5)


_BLAS_PROBE = """
import json, sys
import numpy as np
from cationcalc.chem.conformers import embed_conformers
from cationcalc.engines import get_engine
from cationcalc.engines.blas import blas_status, mkl_in_use
from cationcalc.chem.units import HARTREE_EV
out = []
for smiles, charge, solvent in [("CC(C)(Cl)c1ccccc1", 0, "water"), ("[CH2+]c1ccc(-c2ccccc2)cc1", 1, None)]:
    mol, geometries = embed_conformers(smiles)
    numbers = [a.GetAtomicNum() for a in mol.GetAtoms()]
    r = get_engine("tblite").compute(numbers, geometries[0], charge=charge, multiplicity=1, solvent=solvent)
    out.append([r.energy_ev / HARTREE_EV, np.abs(r.forces_ev_per_angstrom).max() / HARTREE_EV])
print(json.dumps({"results": out, "blas": blas_status()["library"], "mkl_called": mkl_in_use()}))
"""


def _probe(blas: str) -> dict:
    import json
    import os
    import subprocess
    import sys

    env = {**os.environ, "CATIONCALC_BLAS": blas}
    proc = subprocess.run([sys.executable, "-c", _BLAS_PROBE], capture_output=True, text=True, env=env, timeout=300)
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout.strip().splitlines()[-1])


def test_optimized_blas_gives_the_same_energies_and_can_be_switched_off():
    from cationcalc.engines.blas import _mkl_runtime_path

    reference = _probe("reference")
    assert reference["blas"] == "reference" and not reference["mkl_called"]
    if _mkl_runtime_path() is None:
        pytest.skip('MKL not installed (pip install "cationcalc[fast]"): nothing to compare')
    fast = _probe("auto")
    assert fast["blas"] == "mkl" and fast["mkl_called"]  # tblite's BLAS/LAPACK calls really went to MKL
    for (e_ref, f_ref), (e_fast, f_fast) in zip(reference["results"], fast["results"]):
        assert abs(e_ref - e_fast) < 1e-8  # Hartree
        assert abs(f_ref - f_fast) < 1e-7  # Hartree/Å, largest force component


def test_blas_setting_is_validated(monkeypatch):
    from cationcalc.engines import blas

    monkeypatch.setenv(blas.ENV_VAR, "fastest-please")
    with pytest.raises(blas.BLASError, match="choose one of"):
        blas._choice()
    monkeypatch.setenv(blas.ENV_VAR, "off")
    assert blas._choice() == "reference"
