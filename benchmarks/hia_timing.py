"""Where the time goes for the README example: per species wall time, engine time and gradients.

Run:  python benchmarks/hia_timing.py [--workers N]
Prints one line per species and the overhead ratio (engine time / wall time).
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

from cationcalc.execution.executors import compute_many
from cationcalc.compute.models import Settings
from cationcalc.chem.species import Species, carbocation, hydride_adduct

HERE = Path(__file__).resolve().parent


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--workers", type=int, default=1)
    parser.add_argument("--solvent", default="none")
    args = parser.parse_args()
    lines = (HERE.parent / "workflows" / "readme_cations.smi").read_text().splitlines()
    needed = []
    for line in lines:
        if not line.strip() or line.startswith("#"):
            continue
        cation = carbocation(line.split()[0])
        needed += [Species(cation.smiles, 1, 1), hydride_adduct(cation)]
    settings = Settings(solvent=args.solvent)
    start = time.perf_counter()
    results = compute_many(needed, settings, workers=args.workers)
    wall = time.perf_counter() - start
    total_engine = total_species_wall = 0.0
    print(f"{'species':28s} {'atoms':>5s} {'wall/s':>7s} {'engine/s':>8s}  gradients (screen/opt/hessian)")
    for sp, r in results.items():
        if not hasattr(r, "profile"):
            print(f"{sp.smiles:28s} failed: {r.message}")
            continue
        g = r.profile.gradients
        total_engine += r.profile.engine_s
        total_species_wall += r.profile.wall_s
        print(f"{sp.smiles:28s} {len(r.numbers):5d} {r.profile.wall_s:7.2f} {r.profile.engine_s:8.2f}  "
              f"{g.get('conformer_screen', 0)}/{g.get('optimization', 0)}/{g.get('hessian', 0)}")
    print(f"species: {len(results)}, workers: {args.workers}, wall {wall:.1f} s, "
          f"{60 * len(results) / wall:.1f} species/min")
    print(f"overhead ratio (engine time / species wall time): {total_engine / total_species_wall:.2f}")


if __name__ == "__main__":
    main()
