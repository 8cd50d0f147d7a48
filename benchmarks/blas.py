"""BLAS/LAPACK behind tblite: the reference BLAS of the wheel against MKL, same energies.

Run:  python benchmarks/blas.py [--repeat 5]
      (needs ``pip install "cationcalc[fast]"`` for the MKL side)

For n-alkanes and oligo(p-phenylene)methyl cations from 17 to 182 atoms, one
energy+gradient (GFN2-xTB, water) is timed in a fresh interpreter with
``CATIONCALC_BLAS=reference`` and with ``CATIONCALC_BLAS=mkl``: median seconds
per call after a warm-up call, the speed-up, and the largest energy
difference in Hartree (must be ~1e-10).  The whole-pipeline effect is
measured by ``scaling.py`` run both ways.  Writes ``benchmarks/results/blas.json``.
"""

from __future__ import annotations

import argparse
import json
import statistics
import time
from pathlib import Path

from _common import machine, run_child, save

MOLECULES = ["CC(C)(C)C", "C" * 11, "C" * 20, "[CH2+]" + "c1ccc(cc1)" * 4 + "c1ccccc1", "C" * 30,
             "C" * 40, "C" * 60]


def child(smiles: str, repeat: int) -> None:
    import numpy as np
    from rdkit import Chem
    from rdkit.Chem import AllChem

    from cationcalc.engines import get_engine
    from cationcalc.engines.blas import blas_status, mkl_in_use
    from cationcalc.chem.units import HARTREE_EV

    mol = Chem.AddHs(Chem.MolFromSmiles(smiles))
    params = AllChem.ETKDGv3()
    params.randomSeed = 7
    params.useRandomCoords = True
    AllChem.EmbedMolecule(mol, params)
    numbers = [a.GetAtomicNum() for a in mol.GetAtoms()]
    positions = np.array(mol.GetConformer().GetPositions())
    charge = Chem.GetFormalCharge(mol)
    engine = get_engine("tblite")
    engine.compute(numbers, positions, charge=charge, multiplicity=1, solvent="water")
    times, energy = [], None
    for _ in range(repeat):
        engine.reset()  # every call a full SCF from scratch
        start = time.perf_counter()
        energy = engine.compute(numbers, positions, charge=charge, multiplicity=1, solvent="water").energy_ev
        times.append(time.perf_counter() - start)
    print(json.dumps({"atoms": len(numbers), "seconds": statistics.median(times),
                      "energy_hartree": energy / HARTREE_EV, "blas": blas_status()["library"],
                      "mkl_called": mkl_in_use()}))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    parser.add_argument("--smiles", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        child(args.smiles, args.repeat)
        return
    script = Path(__file__).resolve()
    print(f"machine: {machine()}")
    print(f"{'atoms':>5s} {'reference s':>11s} {'MKL s':>8s} {'speed-up':>8s} {'|ΔE| / Eh':>10s}")
    rows = []
    for smiles in MOLECULES:
        ref = run_child(script, ["--smiles", smiles, "--repeat", str(args.repeat)], {"CATIONCALC_BLAS": "reference"})
        try:
            fast = run_child(script, ["--smiles", smiles, "--repeat", str(args.repeat)], {"CATIONCALC_BLAS": "mkl"})
        except RuntimeError as exc:
            print(f"MKL not usable here: {str(exc).splitlines()[-1]}")
            return
        row = {"smiles": smiles, "atoms": ref["atoms"], "reference_s": ref["seconds"], "mkl_s": fast["seconds"],
               "speedup": ref["seconds"] / fast["seconds"],
               "energy_difference_hartree": abs(ref["energy_hartree"] - fast["energy_hartree"]),
               "mkl_called": fast["mkl_called"] and not ref["mkl_called"]}
        rows.append(row)
        print(f"{row['atoms']:5d} {row['reference_s']:11.4f} {row['mkl_s']:8.4f} {row['speedup']:8.2f} "
              f"{row['energy_difference_hartree']:10.1e}" + ("" if row["mkl_called"] else "  (MKL not called!)"),
              flush=True)
    print(f"saved {save('blas', {'rows': rows})}")


if __name__ == "__main__":
    main()
