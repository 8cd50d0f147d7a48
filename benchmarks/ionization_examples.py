"""Ionization examples with their numbers: a full leaving-group ladder and two site scans.

Run:  python benchmarks/ionization_examples.py [--workers N]
Writes benchmarks/results/ionization_examples.md (tables and timings) and prints it.

* ladder: 1-phenylethyl with every leaving group of the library in water, with the
  Spearman ρ against the relative solvolysis rates of 1-phenylethyl-X (Noyce and
  Virgilio, J. Org. Chem. 37, 2643 (1972), values from memory, bundled in
  cationcalc/data/solvolysis_leaving_groups.csv);
* sites: a drug-like protected amino alcohol (PMB ether + Boc carbamate, an invented
  demonstration substrate) under acid in water, and 2-methylbutane by hydride abstraction.
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

from cationcalc.compute.models import Settings
from cationcalc.tasks.runner import run_task

RESULTS = Path(__file__).parent / "results" / "ionization_examples.md"


def _table(records, columns):
    head = "| " + " | ".join(h for _, h in columns) + " |\n|" + "---|" * len(columns) + "\n"
    rows = []
    for r in records:
        rows.append("| " + " | ".join("" if r.get(k) is None else str(r.get(k)) for k, _ in columns) + " |")
    return head + "\n".join(rows) + "\n"


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--workers", type=int, default=1)
    args = parser.parse_args()
    water = Settings(solvent="water")
    out = ["# Ionization examples (GFN2-xTB/ALPB(water), 298.15 K)\n"]

    start = time.perf_counter()
    ladder = run_task("ladder", [("CC(*)c1ccccc1", "1-phenylethyl")], water, workers=args.workers)
    wall = time.perf_counter() - start
    ok = [r for r in ladder if not r.get("error")]
    out.append(f"## Ladder: 1-phenylethyl-X in water ({len(ok)} groups, {wall:.0f} s, {args.workers} worker(s))\n")
    out.append(_table(ladder, [("rank", "#"), ("leaving_group", "leaving group"), ("dG_ion_kcal_mol", "ΔG_ion"),
                               ("dG_ion_vs_best_kcal_mol", "Δ vs #1"), ("ddG_ion_kcal_mol", "ΔΔG vs t-Bu-X"),
                               ("solvolysis_k_rel", "k_rel (solvolysis)"), ("verdict", "verdict"),
                               ("error", "error")]))
    if ok:
        out.append(f"\nSpearman ρ(−ΔG_ion, lg k_rel) = {ok[0]['spearman_rho_vs_solvolysis']} over "
                   f"{ok[0]['solvolysis_n']} groups; rates: {ok[0]['solvolysis_source']}.\n\n{ok[0]['ladder_note']}.\n")

    for smiles, name, options in [
        ("COc1ccc(COC[C@@H]2CCCN2C(=O)OC(C)(C)C)cc1", "PMB/Boc-protected prolinol (demo)", {"acid": True}),
        ("CC(C)CC", "2-methylbutane", {}),
    ]:
        start = time.perf_counter()
        records = run_task("sites", [(smiles, name)], water, workers=args.workers, **options)
        wall = time.perf_counter() - start
        out.append(f"\n## Sites: {name} `{smiles}` {'(--acid) ' if options else ''}({wall:.0f} s)\n")
        out.append(_table(records, [("rank", "#"), ("site_atom", "atom"), ("leaving_group", "X"),
                                    ("cation_smiles", "cation"), ("cation_class", "class"),
                                    ("dG_ion_kcal_mol", "ΔG_ion"), ("hia_kcal_mol", "HIA"),
                                    ("verdict", "verdict"), ("error", "error")]))
    RESULTS.parent.mkdir(parents=True, exist_ok=True)
    RESULTS.write_text("\n".join(out), encoding="utf-8")
    print("\n".join(out))


if __name__ == "__main__":
    main()
