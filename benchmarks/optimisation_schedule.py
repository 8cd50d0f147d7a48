"""Loose-then-tight optimisation: does optimising to a loose gradient first save gradients?

For species of the drug-like set (every ``--every``-th species with a Hessian in a saved
``druglike.py`` result, up to ``--count``), the conformers the default search keeps are each
optimised from the same start three ways with the default optimiser (LBFGS) in water (ALPB):

* tight: straight to the default threshold (fmax 0.01 eV/Å);
* loose: to the screening threshold (fmax 0.05 eV/Å);
* loose then tight: the loose structure carried on to 0.01 eV/Å.

Printed per conformer: gradients of each, the energy of the loose structure above the tight one
(what a schedule that tightens only the lowest conformer would carry in the others) and of the
loose-then-tight one.  A schedule pays only if loose + (loose → tight) needs fewer gradients than
tight, or if loose energies are close enough to skip tightening.

    flock /tmp/cationcalc-heavy.lock python benchmarks/optimisation_schedule.py [--from results/druglike_fast.json]

writes benchmarks/results/optimisation_schedule.json.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from _common import save  # noqa: E402
from cationcalc.chem import units  # noqa: E402
from cationcalc.chem.bonding import bonds_from_mol  # noqa: E402
from cationcalc.chem.species import species  # noqa: E402
from cationcalc.compute.models import SCREENING_FMAX, Settings  # noqa: E402
from cationcalc.compute.optimize import optimize  # noqa: E402
from cationcalc.compute.pipeline import SpeciesJob, _embed, _screen  # noqa: E402
from cationcalc.engines import get_engine  # noqa: E402


def picked_species(path: Path, every: int, count: int) -> list[dict]:
    run = json.loads(path.read_text())["runs"][0]
    with_hessian = sorted((s for s in run["species"] if s["gradients"]["hessian"] > 0), key=lambda s: s["atoms"])
    return with_hessian[::every][:count]


def measure(entry: dict, settings: Settings, engine) -> list[dict]:
    sp = species(entry["smiles"])
    mol, geometries = _embed(sp, settings)
    job = SpeciesJob(sp, settings, engine, [a.GetAtomicNum() for a in mol.GetAtoms()], bonds_from_mol(mol))
    starts, _ = _screen(job, geometries)
    rows = []
    for start in starts:
        kw = dict(optimizer=settings.optimizer, max_steps=settings.max_steps, **job.engine_keywords)
        tight = optimize(job.numbers, start, engine, fmax=settings.fmax_ev_per_angstrom, **kw)
        loose = optimize(job.numbers, start, engine, fmax=SCREENING_FMAX, **kw)
        then = optimize(job.numbers, loose.positions, engine, fmax=settings.fmax_ev_per_angstrom, **kw)
        rows.append({"smiles": entry["smiles"], "atoms": len(job.numbers), "tight": tight.n_gradients,
                     "loose": loose.n_gradients, "loose_then_tight": loose.n_gradients + then.n_gradients,
                     "loose_above_tight_kcal_mol": (loose.energy_ev - tight.energy_ev) * units.EV_TO_KCAL_MOL,
                     "loose_then_tight_above_tight_kcal_mol": (then.energy_ev - tight.energy_ev) * units.EV_TO_KCAL_MOL})
    return rows


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--from", dest="source", default=str(HERE / "results" / "druglike_fast.json"))
    parser.add_argument("--every", type=int, default=8)
    parser.add_argument("--count", type=int, default=10)
    args = parser.parse_args(argv)
    settings, engine = Settings(solvent="water"), get_engine("tblite")
    rows = []
    for entry in picked_species(Path(args.source), args.every, args.count):
        found = measure(entry, settings, engine)
        rows += found
        for r in found:
            print(f"{r['atoms']:3d} {r['smiles'][:45]:45s} tight {r['tight']:4d}  loose {r['loose']:4d}  "
                  f"loose+tight {r['loose_then_tight']:4d}  E(loose)-E(tight) {r['loose_above_tight_kcal_mol']:+.2f}  "
                  f"E(loose+tight)-E(tight) {r['loose_then_tight_above_tight_kcal_mol']:+.2f}", flush=True)
    total = {k: int(sum(r[k] for r in rows)) for k in ("tight", "loose", "loose_then_tight")}
    gap = np.array([r["loose_above_tight_kcal_mol"] for r in rows])
    summary = {"conformers": len(rows), "gradients": total,
               "loose_above_tight_kcal_mol": {"mean": round(float(gap.mean()), 2), "max": round(float(gap.max()), 2)}}
    print(json.dumps(summary))
    save("optimisation_schedule", {"source": Path(args.source).name, "rows": rows,
                                   "summary": summary})
    return 0


if __name__ == "__main__":
    sys.exit(main())
