"""Cost of one full cation + precursor computation against molecular size and conformer count.

Run:  python benchmarks/scaling.py [--max-atoms 150] [--families alkyl aryl] [--skip-conformers]
      (wrap in ``flock /tmp/cationcalc-heavy.lock`` on a shared machine; CATIONCALC_BLAS=reference
      measures the reference BLAS)

Size: two series from about 10 to 150 atoms, each point a carbocation and its
hydride adduct (the precursor of hydride abstraction) computed top to bottom
in water (embedding, screening, optimisation, bonding guard, Hessian,
thermochemistry) with one conformer, so that only size varies:
  * alkyl: tertiary 2-methyl-2-alkyl cations (CH3)2C+–(CH2)k–H;
  * aryl: oligo(p-phenylene)methyl cations Ph–(C6H4)k–CH2+ (benzyl upwards).
Cost is fitted as wall ∝ atoms^p (log-log least squares) and p printed, with
the per-gradient cost and the number of gradients separately, and against
heavy atoms (wall and gradients ∝ heavy^p).
``--species-from benchmarks/results/druglike_LABEL.json``: no computation; the
same heavy-atom exponents fitted over the species a drug-like run computed
(``benchmarks/druglike.py``), i.e. the cost exponent of that protocol.
Conformers: one pair (2-octyl cation / octane) with the conformer cap and the
number optimised set to 1, 2, 4, 8, 16; cost ∝ conformers^q.
Writes ``benchmarks/results/scaling.json``.
"""

from __future__ import annotations

import argparse
import json
import time
from pathlib import Path

from _common import fit_exponent, machine, run_child, save


def alkyl(k: int) -> str:
    """(CH3)2C+–(CH2)(k−1)–CH3, k ≥ 1 (k = 1: tert-butyl)."""
    return "C[C+](C)" + "C" * k


def aryl(k: int) -> str:
    return "[CH2+]" + "c1ccc(cc1)" * k + "c1ccccc1"


SERIES = {
    # k chosen so that the cation has about 10 ... 150 atoms (alkyl: 3k+10, aryl: 10k+14)
    "alkyl": (alkyl, [1, 3, 6, 10, 16, 24, 35, 46]),
    "aryl": (aryl, [0, 1, 2, 4, 6, 9, 13]),
}


def child(smiles: str, cap: int) -> None:
    from cationcalc.chem.conformers import ConformerSettings
    from cationcalc.execution.executors import compute_one
    from cationcalc.compute.models import Settings
    from cationcalc.chem.species import Species, carbocation, hydride_adduct

    settings = Settings(solvent="water", conformers=ConformerSettings(base=cap, per_rotor=0, max_conformers=cap,
                                                                       n_optimize=cap))
    cation = carbocation(smiles, force=True)
    pair = [Species(cation.smiles, 1, 1), hydride_adduct(cation)]
    out = {"smiles": smiles, "atoms": 0, "wall_s": 0.0, "engine_s": 0.0, "gradients": 0, "failed": []}
    start = time.perf_counter()
    for sp in pair:
        r = compute_one(sp, settings)
        if not hasattr(r, "profile"):
            out["failed"].append(f"{sp.smiles}: {r.message}")
            continue
        out["atoms"] = max(out["atoms"], len(r.numbers))
        out["heavy_atoms"] = max(out.get("heavy_atoms", 0), sum(1 for z in r.numbers if z > 1))
        out["engine_s"] += r.profile.engine_s
        out["gradients"] += sum(r.profile.gradients.values())
        out["conformers_in_window"] = len([c for c in r.conformers if c.weight > 0])
    out["wall_s"] = time.perf_counter() - start
    from cationcalc.engines.blas import blas_status

    out["blas"] = blas_status()["library"]
    print(json.dumps(out))


def species_exponent(path: Path) -> dict:
    """Heavy-atom cost exponents over the species of a drug-like run (benchmarks/druglike.py results)."""
    data = json.loads(path.read_text(encoding="utf-8"))
    out = {}
    for run in data["runs"]:
        pts = [sp for sp in run["species"] if sp["wall_s"] > 0 and sum(sp["gradients"].values()) > 0]
        if len({sp["heavy_atoms"] for sp in pts}) < 3:
            print(f"workers {run['workers']}: fewer than 3 sizes, no fit")
            continue
        heavy = [sp["heavy_atoms"] for sp in pts]
        fit = {"species": len(pts), "heavy_atoms": [min(heavy), max(heavy)],
               "wall": fit_exponent(heavy, [sp["wall_s"] for sp in pts]),
               "gradients": fit_exponent(heavy, [sum(sp["gradients"].values()) for sp in pts])}
        big = [sp for sp in pts if sp["heavy_atoms"] >= 10]
        if len({sp["heavy_atoms"] for sp in big}) >= 3:
            fit["wall_10_plus"] = fit_exponent([sp["heavy_atoms"] for sp in big], [sp["wall_s"] for sp in big])
        lo, hi = fit["heavy_atoms"]
        print(f"{path.name} (label {data.get('label')!r}), workers {run['workers']}: {fit['species']} species, "
              f"{lo}–{hi} heavy atoms: species wall ∝ heavy^{fit['wall']:.2f}, "
              f"gradients ∝ heavy^{fit['gradients']:.2f}"
              + (f"; from 10 heavy atoms up wall ^{fit['wall_10_plus']:.2f}" if "wall_10_plus" in fit else ""))
        out[str(run["workers"])] = fit
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--max-atoms", type=int, default=150)
    parser.add_argument("--families", nargs="+", default=list(SERIES), choices=list(SERIES))
    parser.add_argument("--conformer-counts", type=int, nargs="+", default=[1, 2, 4, 8, 16])
    parser.add_argument("--skip-conformers", action="store_true")
    parser.add_argument("--name", default="scaling", help="results file name (benchmarks/results/NAME.json)")
    parser.add_argument("--species-from", type=Path, default=None,
                        help="a druglike.py results file: the heavy-atom exponent over its species, no computation")
    parser.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    parser.add_argument("--smiles", help=argparse.SUPPRESS)
    parser.add_argument("--cap", type=int, default=1, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        child(args.smiles, args.cap)
        return
    if args.species_from:
        species_exponent(args.species_from)
        return
    script = Path(__file__).resolve()
    print(f"machine: {machine()}")
    payload = {"size": {}, "conformers": None}
    for family in args.families:
        make, ks = SERIES[family]
        points = []
        print(f"\n{family}: cation + hydride adduct, one conformer, water")
        print(f"{'atoms':>5s} {'wall/s':>8s} {'engine/s':>8s} {'gradients':>9s} {'ms/gradient':>11s}  cation")
        for k in ks:
            smiles = make(k)
            estimate = (3 * k + 10) if family == "alkyl" else (10 * k + 14)
            if estimate > args.max_atoms:
                continue
            r = run_child(script, ["--smiles", smiles, "--cap", "1"])
            points.append(r)
            per = 1000 * r["engine_s"] / max(r["gradients"], 1)
            print(f"{r['atoms']:5d} {r['wall_s']:8.2f} {r['engine_s']:8.2f} {r['gradients']:9d} {per:11.1f}  {smiles}"
                  + (f"  FAILED {r['failed']}" if r["failed"] else ""), flush=True)
        good = [p for p in points if not p["failed"]]
        fit = {}
        if len(good) >= 3:
            atoms = [p["atoms"] for p in good]
            fit = {"wall": fit_exponent(atoms, [p["wall_s"] for p in good]),
                   "gradients": fit_exponent(atoms, [p["gradients"] for p in good]),
                   "per_gradient": fit_exponent(atoms, [p["engine_s"] / p["gradients"] for p in good])}
            heavy = [p.get("heavy_atoms") for p in good]
            if all(heavy) and len(set(heavy)) >= 3:
                fit["heavy_wall"] = fit_exponent(heavy, [p["wall_s"] for p in good])
                fit["heavy_gradients"] = fit_exponent(heavy, [p["gradients"] for p in good])
            big = [p for p in good if p["atoms"] >= 40]
            if len(big) >= 3:
                fit["wall_40_plus"] = fit_exponent([p["atoms"] for p in big], [p["wall_s"] for p in big])
            print(f"{family}: wall ∝ atoms^{fit['wall']:.2f} (gradients ^{fit['gradients']:.2f}, cost per gradient "
                  f"^{fit['per_gradient']:.2f})" + (f"; from 40 atoms up ^{fit['wall_40_plus']:.2f}"
                                                     if "wall_40_plus" in fit else ""))
            if "heavy_wall" in fit:
                print(f"{family}: against heavy atoms wall ∝ heavy^{fit['heavy_wall']:.2f}, gradients "
                      f"^{fit['heavy_gradients']:.2f}")
        payload["size"][family] = {"points": points, "exponent": fit}
    if not args.skip_conformers:
        print("\nconformer count: 2-octyl cation + octane, water (cap = number optimised)")
        print(f"{'conformers':>10s} {'wall/s':>8s} {'gradients':>9s}")
        points = []
        for n in args.conformer_counts:
            r = run_child(script, ["--smiles", "C[CH+]CCCCCC", "--cap", str(n)])
            r["conformers"] = n
            points.append(r)
            print(f"{n:10d} {r['wall_s']:8.2f} {r['gradients']:9d}", flush=True)
        q = fit_exponent([p["conformers"] for p in points], [p["wall_s"] for p in points])
        print(f"conformers: wall ∝ conformers^{q:.2f}")
        payload["conformers"] = {"points": points, "exponent": q}
    path = save(args.name, payload)
    print(f"wrote {path}")


if __name__ == "__main__":
    main()
