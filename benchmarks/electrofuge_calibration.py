"""Compute the HIA descriptor of every reference cation of the E_f and E scales, compare candidate descriptors.

For each implicit solvent given (gas = none), the HIA (isodesmic hydride
exchange with tert-butyl, GFN2-xTB, default settings) of the 22 published
benzhydrylium electrofuges (Denegri et al. Chem. Eur. J. 2006, 12, 1648;
Streidl thesis 2010, Table 5.1) and of the benzhydrylium ions of Mayr's E
scale (J. Am. Chem. Soc. 2001, 123, 9500; 2012 revisions) is computed (or read
from the store), then E_f and E are fitted against HIA and against ΔG-HIA with
leave-one-out errors.  ``--write`` stores the descriptors in
cationcalc/data/cation_descriptors.csv, which cationcalc.trust.electrofuges reads.

    python benchmarks/electrofuge_calibration.py --store ef.sqlite --solvents none water dichloromethane --write
"""

from __future__ import annotations

import argparse
import csv
import datetime
import sys
import time
from pathlib import Path

from cationcalc.about import __version__
from cationcalc.trust.electrofuges import (ScaleCalibration, _calibrate, descriptor_level, published_electrofugalities,
                                     published_electrophilicities)
from cationcalc.compute.models import Settings
from cationcalc.execution.store import ResultStore
from cationcalc.tasks.runner import run_task

DATA = Path(__file__).resolve().parent.parent / "cationcalc" / "data" / "cation_descriptors.csv"
COLUMNS = ["cation_smiles", "level", "hia_kcal_mol", "hia_G_kcal_mol", "package_version", "computed"]


def compute(solvents: list[str], store_path: str | None, workers: int, refine: str | None = None,
            scales: tuple[str, ...] = ("E_f", "E")) -> list[dict]:
    cations = {**({k: r["name"] for k, r in published_electrofugalities().items()} if "E_f" in scales else {}),
               **({k: r["name"] for k, r in published_electrophilicities().items()} if "E" in scales else {})}
    store = ResultStore(store_path) if store_path else None
    rows = []
    for solvent in solvents:
        settings = Settings(solvent=None if solvent == "none" else solvent)
        start = time.perf_counter()
        options = {"refine": refine, "refine_log": lambda line: print(line, file=sys.stderr)} if refine else {}
        records = run_task("hia", [(s, n) for s, n in cations.items()], settings, workers=workers, store=store,
                           **options)
        level = descriptor_level(solvent, refine)
        print(f"{level}: {len(records)} cations in {time.perf_counter() - start:.0f} s", file=sys.stderr)
        for r in records:
            if r.get("error"):
                print(f"  {r['name']}: {r['error']}", file=sys.stderr)
                continue
            rows.append({"cation_smiles": r["cation_smiles"], "level": level,
                         "hia_kcal_mol": r["hia_kcal_mol"], "hia_G_kcal_mol": r["hia_G_kcal_mol"],
                         "package_version": __version__, "computed": datetime.date.today().isoformat()})
    return rows


def compare(solvents: list[str], refine: str | None = None) -> list[ScaleCalibration]:
    out = []
    levels = [descriptor_level(None if s == "none" else s) for s in solvents]
    if refine:
        levels += [descriptor_level(None if s == "none" else s, refine) for s in solvents]
    for level in levels:
        for quantity in ("hia_kcal_mol", "hia_G_kcal_mol"):
            for scale, table, column in (("E_f", published_electrofugalities(), "E_f"),
                                         ("E", published_electrophilicities(), "E")):
                try:
                    out.append(_calibrate(scale, table, column, level, quantity))
                except ValueError as exc:
                    print(f"{scale} {level} {quantity}: {exc}", file=sys.stderr)
    return out


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--solvents", nargs="+", default=["none", "water", "dichloromethane"])
    parser.add_argument("--store", default=None)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--refine", default=None, help="DFT level of the DFT//xTB descriptor, e.g. B3LYP-D3BJ/def2-SVP")
    parser.add_argument("--scales", nargs="+", default=["E_f", "E"], choices=["E_f", "E"],
                        help="reference cations of these scales (default both; E_f alone: its 22 cations, of which "
                             "7 also calibrate E)")
    parser.add_argument("--write", action="store_true", help="write cationcalc/data/cation_descriptors.csv")
    args = parser.parse_args()
    rows = compute(args.solvents, args.store, args.workers, args.refine, tuple(args.scales))
    if args.write:
        levels = {r["level"] for r in rows}
        with DATA.open(encoding="utf-8") as handle:
            rows = [r for r in csv.DictReader(handle) if r["level"] not in levels] + rows
        with DATA.open("w", newline="", encoding="utf-8") as handle:
            writer = csv.DictWriter(handle, fieldnames=COLUMNS, lineterminator="\n")
            writer.writeheader()
            writer.writerows(rows)
        from cationcalc.trust import electrofuges

        electrofuges.descriptor_rows.cache_clear()
        print(f"wrote {len(rows)} rows to {DATA}", file=sys.stderr)
    print("| scale | level | descriptor | n | slope | intercept | r | LOO MAE | LOO RMSE | LOO max |")
    print("|---|---|---|---|---|---|---|---|---|---|")
    for cal in compare(args.solvents, args.refine):
        print(f"| {cal.scale} | {cal.level} | {cal.quantity} | {cal.n} | {cal.a:.4f} | {cal.b:.2f} | {cal.r:.3f} | "
              f"{cal.loo_mae:.2f} | {cal.loo_rmse:.2f} | {cal.loo_max:.2f} |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
