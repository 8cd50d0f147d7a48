"""How often the default conformer search misses a species' lowest structure by more than 0.5 kcal/mol.

For every species of the benchmark sets (the cations and hydride adducts of
data/gas_hydride_ion_affinities.csv, the cations of data/rearrangements.csv,
the benzyl cations of data/sigma_plus.csv, a set of tert-alkyl cations) the
lowest electronic energy of the default search is compared with the lowest
of a much larger search (more embedded conformers, more optimised, three
seeds).  Both run without Hessians (energies after optimisation: the search
is what is measured).  A species whose default minimum is more than
``--miss`` kcal/mol above the best found is a miss.  With ``--shifts`` the
1,2-shift screen of every cation is also run (depth 1, no settling) and the
products that relax back into their parent below it are counted.

    python benchmarks/conformer_misses.py [--name conformer_misses] [--shifts] [--quick]
    python benchmarks/conformer_misses.py --search n_optimize=6 --reuse results/conformer_misses_full.json

The second form measures a candidate search against the large searches of an
earlier run (only the candidate's own gradients are spent).

Prints one line per species and the totals; writes benchmarks/results/<name>.json.
"""

from __future__ import annotations

import argparse
import csv
import json
import time
from pathlib import Path

from _common import RESULTS, machine

from cationcalc.chem import units
from cationcalc.chem.conformers import ConformerSettings
from cationcalc.chem.species import Species, carbocation, species
from cationcalc.compute.lowest import relaxed_into, structure_energy_hartree
from cationcalc.compute.models import Settings, SpeciesResult
from cationcalc.execution.executors import compute_one

DATA = Path(__file__).resolve().parent.parent / "cationcalc" / "data"
#: cations named in data/rearrangements.csv (by name in its process column)
REARRANGEMENT_CATIONS = {
    "1-propyl": "[CH2+]CC", "2-propyl": "C[CH+]C", "2-butyl": "CC[CH+]C", "t-butyl": "C[C+](C)C",
    "isobutyl": "[CH2+]C(C)C", "n-butyl": "[CH2+]CCC", "2-adamantyl": "[CH+]1C2CC3CC(C2)CC1C3",
    "1-adamantyl": "[C+]12CC3CC(CC(C3)C1)C2", "cyclobutyl": "[CH+]1CCC1", "cyclopropylcarbinyl": "[CH2+]C1CC1",
    "benzyl": "[CH2+]c1ccccc1", "tropylium": "c1cc[cH+]ccc1", "cyclopropenylium": "c1c[cH+]1",
    "allyl": "C=C[CH2+]", "cyclohexyl": "[CH+]1CCCCC1", "1-methylcyclopentyl": "C[C+]1CCCC1",
    "(2-propyl)cyclopentyl": "CC(C)[C+]1CCCC1", "2-cyclopentyl-2-propyl": "C[C+](C)C1CCCC1",
    "ethyl": "C[CH2+]", "2-norbornyl": "[CH+]1CC2CCC1C2", "tert-amyl": "CC[C+](C)C",
    "3-methyl-2-butyl": "C[CH+]C(C)C", "vinyl": "C=[CH+]",
}
#: tert-alkyl cations (alkyl chains on a tertiary centre: the torsions next to the centre decide hyperconjugation)
TERT_ALKYL = {
    "tert-amyl": "CC[C+](C)C", "2-methyl-2-pentyl": "CCC[C+](C)C", "3-methyl-3-pentyl": "CC[C+](C)CC",
    "2,3-dimethyl-2-butyl": "CC(C)[C+](C)C", "3-ethyl-3-pentyl": "CC[C+](CC)CC",
    "2,3,3-trimethyl-2-butyl": "CC(C)(C)[C+](C)C", "2-methyl-2-hexyl": "CCCC[C+](C)C",
    "1-methylcyclohexyl": "C[C+]1CCCCC1", "2-cyclohexyl-2-propyl": "C[C+](C)C1CCCCC1",
}
#: the larger search the default is compared with
LARGE = dict(base=30, per_rotor=10, max_conformers=100, n_optimize=12)
LARGE_SEEDS = (20261202, 1, 2)


def benchmark_species(quick: bool = False) -> dict[str, Species]:
    """name → species of the sets (duplicates by SMILES kept once, first name wins)."""
    out: dict[str, Species] = {}

    def add(name: str, smiles: str, cation: bool = True) -> None:
        sp = carbocation(smiles, force=True) if cation else species(smiles)
        sp = Species(sp.smiles, sp.charge, sp.multiplicity)
        if sp not in out.values():
            out[name] = sp

    with open(DATA / "gas_hydride_ion_affinities.csv", encoding="utf-8") as fh:
        for row in csv.DictReader(fh):
            add(row["name"], row["cation_smiles"])
            add(row["name"] + " + H-", row["adduct_smiles"], cation=False)
    for name, smiles in {**REARRANGEMENT_CATIONS, **TERT_ALKYL}.items():
        add(name, smiles)
    with open(DATA / "sigma_plus.csv", encoding="utf-8") as fh:
        for row in csv.DictReader(fh):
            add(row["substituent"] + "-benzyl", row["benzyl_cation_smiles"])
    if quick:
        return dict(list(out.items())[::4])
    return out


def energy_only(conformers: ConformerSettings) -> Settings:
    return Settings(hessian_conformers="none", conformers=conformers)


def search(sp: Species, conformers: ConformerSettings) -> dict:
    """Lowest E (kcal/mol), gradients and wall of one search; None energy when it failed or rearranged."""
    start = time.perf_counter()
    result = compute_one(sp, energy_only(conformers))
    wall = time.perf_counter() - start
    if not isinstance(result, SpeciesResult):
        return {"E_kcal_mol": None, "gradients": 0, "wall_s": wall, "error": result.message}
    return {"E_kcal_mol": None if result.rearranged else result.E_hartree * units.HARTREE_TO_KCAL_MOL,
            "gradients": sum(result.profile.gradients.values()), "wall_s": wall, "n_embedded": result.n_embedded}


def measure(items: dict[str, Species], default: ConformerSettings, miss: float,
            reuse: dict[str, list[dict]] | None = None) -> list[dict]:
    """Each species: the searched minimum against the best of the large searches (``reuse``: large searches of
    an earlier run, keyed by SMILES|charge, so another candidate search costs only its own gradients)."""
    rows = []
    for name, sp in items.items():
        base = search(sp, default)
        key = f"{sp.smiles}|{sp.charge}"
        if reuse is not None and key in reuse:
            large = reuse[key]
        else:
            large = [search(sp, ConformerSettings(**LARGE, seed=seed)) for seed in LARGE_SEEDS]
        energies = [r["E_kcal_mol"] for r in [base, *large] if r["E_kcal_mol"] is not None]
        row = {"name": name, "smiles": sp.smiles, "charge": sp.charge, "default": base, "large": large}
        if base["E_kcal_mol"] is not None and energies:
            row["above_best_kcal_mol"] = round(base["E_kcal_mol"] - min(energies), 3)
            row["miss"] = row["above_best_kcal_mol"] > miss
        rows.append(row)
        print(f"{name:28s} {sp.smiles:32s} above best {row.get('above_best_kcal_mol', float('nan')):6.2f} "
              f"gradients {base['gradients']:5d} wall {base['wall_s']:6.2f} s", flush=True)
    return rows


def shift_returns(items: dict[str, Species], miss: float, conformers: ConformerSettings) -> list[dict]:
    """Shift products (depth 1, the searched settings without Hessians) that relax back into their parent below it."""
    from cationcalc.tasks.shifts import run_shifts
    from cationcalc.execution.executors import compute_many

    settings = energy_only(conformers)
    cations = [sp for sp in items.values() if sp.charge == 1]
    seen: dict = {}

    def compute(todo):
        out = compute_many(todo, settings)
        seen.update(out)
        return out

    run_shifts([(sp.smiles, "") for sp in cations], settings, depth=1, compute=compute, settle=lambda cache: {})
    found = []
    for product in seen.values():
        if not isinstance(product, SpeciesResult):
            continue
        parent = relaxed_into(product)
        if parent is None or not isinstance(seen.get(parent), SpeciesResult):
            continue
        below = (seen[parent].E_hartree - structure_energy_hartree(product)) * units.HARTREE_TO_KCAL_MOL
        found.append({"parent": parent.smiles, "product": product.smiles, "below_kcal_mol": round(below, 3),
                      "lower": below > miss})
    return found


def summary(rows: list[dict], returns: list[dict] | None, miss: float) -> dict:
    judged = [r for r in rows if "miss" in r]
    out = {"species": len(rows), "judged": len(judged), "misses": sum(r["miss"] for r in judged),
           "miss_threshold_kcal_mol": miss,
           "missed": {r["name"]: r["above_best_kcal_mol"] for r in judged if r["miss"]},
           "default_gradients": sum(r["default"]["gradients"] for r in rows),
           "default_wall_s": round(sum(r["default"]["wall_s"] for r in rows), 1)}
    if returns is not None:
        out["shift_products_relaxing_into_parent"] = len(returns)
        out["of_which_below_parent"] = sum(r["lower"] for r in returns)
        out["below_parent"] = [r for r in returns if r["lower"]]
    return out


def _field(text: str) -> tuple[str, float | int]:
    name, _, value = text.partition("=")
    if not value:
        raise SystemExit(f"--search {text!r}: write FIELD=VALUE, e.g. n_optimize=6")
    return name, float(value) if "." in value else int(value)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--name", default="conformer_misses")
    parser.add_argument("--miss", type=float, default=0.5, help="kcal/mol above the best that counts as a miss")
    parser.add_argument("--shifts", action="store_true", help="also count shift products below their parent")
    parser.add_argument("--quick", action="store_true", help="every fourth species only")
    parser.add_argument("--search", nargs="*", default=[], metavar="FIELD=VALUE",
                        help="a candidate search instead of the default (ConformerSettings fields, e.g. n_optimize=6)")
    parser.add_argument("--reuse", default=None, metavar="JSON",
                        help="take the large searches from this earlier result (only the candidate search runs)")
    args = parser.parse_args()
    items = benchmark_species(args.quick)
    default = ConformerSettings(**dict(_field(f) for f in args.search))
    reuse = None
    if args.reuse:
        saved = json.loads(Path(args.reuse).read_text(encoding="utf-8"))
        reuse = {f"{r['smiles']}|{r['charge']}": r["large"] for r in saved["rows"]}
    rows = measure(items, default, args.miss, reuse)
    returns = shift_returns(items, args.miss, default) if args.shifts else None
    result = {"machine": machine(), "default_conformers": default.model_dump(), "searched": args.search or "default",
              "large_from": args.reuse or "this run", "large": LARGE,
              "large_seeds": LARGE_SEEDS, "summary": summary(rows, returns, args.miss), "rows": rows}
    s = result["summary"]
    print(f"\nmisses > {args.miss} kcal/mol: {s['misses']}/{s['judged']} ({', '.join(s['missed']) or 'none'}); "
          f"default search: {s['default_gradients']} gradients, {s['default_wall_s']} s")
    if returns is not None:
        print(f"shift products relaxing into their parent: {s['shift_products_relaxing_into_parent']}, "
              f"below it by > {args.miss}: {s['of_which_below_parent']}")
    RESULTS.mkdir(exist_ok=True)
    (RESULTS / f"{args.name}.json").write_text(json.dumps(result, indent=1), encoding="utf-8")


if __name__ == "__main__":
    main()
