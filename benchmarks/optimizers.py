"""Optimizers compared: gradients to convergence and wall time on the 24-substrate set.

Run:  python benchmarks/optimizers.py [--limit N] [--optimizers LBFGS BFGS FIRE PreconLBFGS]

For every substrate and its cation (the chloride taken off, as ``ionize``
does) the first embedded conformer is relaxed in water to max |F| < 0.01 eV/Å
(the pipeline's threshold, at most 500 steps) by each ASE optimizer from the
same start: LBFGS, BFGS, FIRE and PreconLBFGS (LBFGS with an exponential
bond-length preconditioner, cationcalc.compute.optimize).  Prints per optimizer:
converged count, total and median gradients, total wall time, and how often
it reached the lowest energy any optimizer found (within 0.05 kcal/mol).
Writes ``benchmarks/results/optimizers.json``.
"""

from __future__ import annotations

import argparse
import statistics
import time

from _common import machine, save, substrates


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--limit", type=int, default=None)
    parser.add_argument("--optimizers", nargs="+", default=["LBFGS", "BFGS", "FIRE", "PreconLBFGS"])
    args = parser.parse_args()

    from cationcalc.chem.conformers import embed_conformers
    from cationcalc.engines import get_engine
    from cationcalc.compute.optimize import optimize
    from cationcalc.chem.species import heterolysis_fragments
    from cationcalc.chem.units import EV_TO_KCAL_MOL

    engine = get_engine("tblite")
    jobs = []
    for smiles, name in substrates(args.limit):
        het = heterolysis_fragments(smiles)
        jobs += [(name, het.substrate.smiles, 0), (name + " cation", het.cation.smiles, 1)]
    stats = {o: {"converged": 0, "gradients": [], "wall_s": 0.0, "lowest": 0} for o in args.optimizers}
    rows = []
    print(f"machine: {machine()}")
    for name, smiles, charge in jobs:
        mol, geometries = embed_conformers(smiles)
        numbers = [a.GetAtomicNum() for a in mol.GetAtoms()]
        row = {"species": smiles, "charge": charge, "atoms": len(numbers)}
        for opt_name in args.optimizers:
            engine.reset()
            start = time.perf_counter()
            r = optimize(numbers, geometries[0], engine, charge=charge, multiplicity=1, solvent="water",
                         fmax=0.01, max_steps=500, optimizer=opt_name)
            wall = time.perf_counter() - start
            row[opt_name] = {"gradients": r.n_gradients, "wall_s": wall, "converged": r.converged,
                             "energy_ev": r.energy_ev}
            s = stats[opt_name]
            s["converged"] += r.converged
            s["gradients"].append(r.n_gradients)
            s["wall_s"] += wall
        lowest = min(row[o]["energy_ev"] for o in args.optimizers if row[o]["converged"]) \
            if any(row[o]["converged"] for o in args.optimizers) else None
        for o in args.optimizers:
            if lowest is not None and row[o]["converged"] and \
                    (row[o]["energy_ev"] - lowest) * EV_TO_KCAL_MOL < 0.05:
                stats[o]["lowest"] += 1
        rows.append(row)
        print(f"{smiles:36s} " + " ".join(f"{o}:{row[o]['gradients']}{'' if row[o]['converged'] else '!'}"
                                          for o in args.optimizers), flush=True)
    n = len(jobs)
    print(f"\n{'optimizer':>12s} {'converged':>9s} {'gradients':>9s} {'median':>6s} {'wall/s':>7s} "
          f"{'ms/step':>7s} {'lowest E':>8s}")
    table = {}
    for o, s in stats.items():
        total = sum(s["gradients"])
        table[o] = {"converged": s["converged"], "of": n, "gradients": total,
                    "median_gradients": statistics.median(s["gradients"]), "wall_s": s["wall_s"],
                    "reached_lowest": s["lowest"]}
        print(f"{o:>12s} {s['converged']:5d}/{n:<3d} {total:9d} {statistics.median(s['gradients']):6.0f} "
              f"{s['wall_s']:7.1f} {1000 * s['wall_s'] / max(total, 1):7.1f} {s['lowest']:5d}/{n}")
    save("optimizers", {"table": table, "rows": rows})


if __name__ == "__main__":
    main()
