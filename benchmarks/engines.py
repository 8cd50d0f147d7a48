"""tblite against xtb-python on the 24-substrate set, in one run.

Run:  python benchmarks/engines.py [--limit N] [--solvent water]
      (xtb-python: pip install "cationcalc[xtb]", Python <= 3.11)

``ionize`` with chloride (no shift screen), serial, each engine in a fresh
interpreter: wall time, engine time, gradients, and the ratio of wall times
xtb / tblite.  In a solvent tblite uses ALPB and xtb-python GBSA (the only
model it has), so ΔG_ion differ by the solvent model; with ``--solvent none``
both compute the same gas-phase GFN2-xTB and the largest ΔG_ion difference
is printed as a check.  Writes ``benchmarks/results/engines.json``.
"""

from __future__ import annotations

import argparse
import json
import time
from pathlib import Path

from _common import machine, run_child, save, substrates


def child(engine: str, solvent: str, limit: int | None) -> None:
    from cationcalc.compute.models import Settings
    from cationcalc.tasks.runner import run_task

    computed = []
    start = time.perf_counter()
    records = run_task("ionize", substrates(limit), Settings(engine=engine, solvent=solvent), workers=1,
                       leaving_group="chloride", shifts=False, progress=lambda sp, r: computed.append(r))
    wall = time.perf_counter() - start
    ok = [r for r in computed if hasattr(r, "profile")]
    print(json.dumps({"engine": engine, "wall_s": wall, "engine_s": sum(r.profile.engine_s for r in ok),
                      "gradients": sum(sum(r.profile.gradients.values()) for r in ok), "species": len(computed),
                      "failed": [r["input"] for r in records if r.get("error")],
                      "dG_ion_kcal_mol": {r["input"]: r.get("dG_ion_kcal_mol") for r in records}}))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--limit", type=int, default=None)
    parser.add_argument("--solvent", default="water")
    parser.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    parser.add_argument("--engine", default="tblite", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        child(args.engine, args.solvent, args.limit)
        return
    script = Path(__file__).resolve()
    extra = ["--solvent", args.solvent] + (["--limit", str(args.limit)] if args.limit else [])
    runs = {name: run_child(script, ["--engine", name, *extra]) for name in ("tblite", "xtb")}
    print(f"machine: {machine()}")
    print(f"{'engine':>7s} {'wall/s':>8s} {'engine/s':>8s} {'gradients':>9s} {'ms/gradient':>11s}  failed")
    for name, r in runs.items():
        print(f"{name:>7s} {r['wall_s']:8.1f} {r['engine_s']:8.1f} {r['gradients']:9d} "
              f"{1000 * r['engine_s'] / max(r['gradients'], 1):11.2f}  {len(r['failed'])}")
    ratio = runs["xtb"]["wall_s"] / runs["tblite"]["wall_s"]
    print(f"wall-time ratio xtb-python / tblite: {ratio:.2f}")
    diffs = [abs(a - b) for k, a in runs["tblite"]["dG_ion_kcal_mol"].items()
             if (b := runs["xtb"]["dG_ion_kcal_mol"].get(k)) is not None and a is not None]
    if diffs:
        print(f"largest |ΔG_ion(tblite) − ΔG_ion(xtb)|: {max(diffs):.2f} kcal/mol"
              + (" (ALPB vs GBSA)" if args.solvent not in ("none", "gas") else ""))
    save("engines", {"solvent": args.solvent, "runs": runs, "wall_ratio_xtb_over_tblite": ratio})


if __name__ == "__main__":
    main()
