"""Throughput on the 24-substrate set: ionize with chloride in water, serial and parallel.

Run:  python benchmarks/throughput.py [--workers 1 2] [--no-shifts] [--limit N]
      (wrap in ``flock /tmp/cationcalc-heavy.lock`` on a shared machine)

Each configuration runs in a fresh interpreter (cold engine cache, fresh pool),
with the same settings as ``cationcalc ionize -i benchmarks/substrates.smi
--leaving-group chloride --solvent water`` (the 1,2-shift screen included
unless ``--no-shifts``).  Prints, per worker count: wall time, substrates and
species per minute, the overhead ratio (engine time / species wall time),
parallel efficiency T1 / (n·Tn) and peak resident memory per process.  Writes
``benchmarks/results/throughput.json``.
"""

from __future__ import annotations

import argparse
import json
import sys
import time

from pathlib import Path

from _common import machine, peak_rss_mb, run_child, save, substrates


def child(workers: int, shifts: bool, limit: int | None) -> None:
    from cationcalc.compute.models import Settings
    from cationcalc.tasks.runner import run_task

    items = substrates(limit)
    computed, per_species = [], []

    def progress(sp, result):
        computed.append(result)
        if hasattr(result, "profile"):
            per_species.append((sp.smiles, len(result.numbers), round(result.profile.wall_s, 2)))

    start = time.perf_counter()
    records = run_task("ionize", items, Settings(solvent="water"), workers=workers, progress=progress,
                       leaving_group="chloride", shifts=shifts)
    wall = time.perf_counter() - start
    profiles = [r.profile for r in computed if hasattr(r, "profile")]
    own, kids = peak_rss_mb()
    grads: dict[str, int] = {}
    for p in profiles:
        for k, v in p.gradients.items():
            grads[k] = grads.get(k, 0) + v
    print(json.dumps({
        "workers": workers, "wall_s": wall, "substrates": len(items),
        "failed": [r["input"] for r in records if r.get("error")],
        "species": len(computed), "species_wall_s": sum(p.wall_s for p in profiles),
        "engine_s": sum(p.engine_s for p in profiles), "gradients": grads,
        "peak_rss_main_mb": own, "peak_rss_worker_mb": kids if workers > 1 else own,
        "dG_ion_kcal_mol": {r["input"]: r.get("dG_ion_kcal_mol") for r in records},
        "slowest_species": sorted(per_species, key=lambda t: -t[2])[:5],
    }))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--workers", type=int, nargs="+", default=[1, 2])
    parser.add_argument("--no-shifts", action="store_true")
    parser.add_argument("--limit", type=int, default=None, help="first N substrates only (a quick look)")
    parser.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        child(args.workers[0], not args.no_shifts, args.limit)
        return
    runs = []
    for w in args.workers:
        extra = ["--no-shifts"] if args.no_shifts else []
        extra += ["--limit", str(args.limit)] if args.limit else []
        runs.append(run_child(Path(__file__).resolve(),
                              ["--workers", str(w), *extra]))
    print(f"machine: {machine()}")
    base = next((r for r in runs if r["workers"] == 1), None)
    print(f"{'workers':>7s} {'wall/s':>8s} {'subst/min':>9s} {'species/min':>11s} {'overhead':>8s} "
          f"{'efficiency':>10s} {'peak MB/proc':>12s}  failed")
    for r in runs:
        r["substrates_per_min"] = 60 * r["substrates"] / r["wall_s"]
        r["species_per_min"] = 60 * r["species"] / r["wall_s"]
        r["overhead_ratio"] = r["engine_s"] / r["species_wall_s"] if r["species_wall_s"] else 0.0
        r["parallel_efficiency"] = base["wall_s"] / (r["workers"] * r["wall_s"]) if base else None
        eff = f"{r['parallel_efficiency']:.2f}" if r["parallel_efficiency"] is not None else "-"
        print(f"{r['workers']:7d} {r['wall_s']:8.1f} {r['substrates_per_min']:9.1f} {r['species_per_min']:11.1f} "
              f"{r['overhead_ratio']:8.2f} {eff:>10s} {r['peak_rss_worker_mb']:12.0f}  {len(r['failed'])}")
    if len(runs) > 1:
        same = all(runs[0]["dG_ion_kcal_mol"] == r["dG_ion_kcal_mol"] for r in runs[1:])
        print(f"identical ΔG_ion on every worker count: {same}")
    print(f"gradients (serial): {base['gradients'] if base else runs[0]['gradients']}")
    print(f"slowest species (serial, s): {(base or runs[0])['slowest_species']}")
    path = save("throughput", {"shifts": not args.no_shifts, "runs": runs})
    print(f"wrote {path}")


if __name__ == "__main__":
    main()
