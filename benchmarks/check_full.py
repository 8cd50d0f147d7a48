"""The full reference check (a benchmark, not a unit test) and the stored calibration it fits.

Run:  python benchmarks/check_full.py [--workers 1] [--store PATH] [--write-calibration]

Recomputes every bundled reference set (gas-phase HIA, σ⁺ benzyl and cumyl,
Mayr E in dichloromethane, pKR⁺ in water) and the trend checks at default
settings, then writes into benchmarks/results/:

* check_full.md / check_full.json — the report (per set n, MAE/RMSE or
  slope/r/ρ, worst five with sources, per-class residuals, trend table);
* check_<set>.png — a parity or correlation plot per set.

With ``--write-calibration`` the gas-phase calibration (HIA_exp ≈ a·HIA_calc + b,
leave-one-out errors, per-class residuals) is fitted to this run and stored in
cationcalc/data/calibration.csv and calibration_residuals.csv; the report is then
evaluated a second time (from the result store, no recomputation) so it shows the
stored calibration applied.  Species are kept in a result store (default: in the
system temporary folder) so a re-run is instant.
"""

from __future__ import annotations

import argparse
import shutil
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--workers", type=int, default=1)
    parser.add_argument("--engine", default="tblite")
    parser.add_argument("--store", default=str(Path(tempfile.gettempdir()) / "cationcalc-check-full" / "store.sqlite"))
    parser.add_argument("--output", default=str(HERE / "results"))
    parser.add_argument("--write-calibration", action="store_true")
    parser.add_argument("--note", default="", help="a line appended to the report (e.g. the time of the first pass)")
    args = parser.parse_args()

    from cationcalc.trust import calibration
    from cationcalc.checks import literature as checks
    from cationcalc.compute.models import Settings
    from cationcalc.execution.store import ResultStore

    settings = Settings(engine=args.engine)
    out = Path(args.output)
    start = time.perf_counter()
    with ResultStore(args.store) as store:
        report = checks.run_checks(settings, quick=False, workers=args.workers, store=store)
        computed = time.perf_counter() - start
        hits, misses = store.hits, store.misses
        if args.write_calibration:
            cal = checks.calibration_from_report(report, settings)
            data = Path(calibration.__file__).resolve().parents[1] / "data"
            calibration.write_calibrations([cal], data)
            calibration.stored_calibrations.cache_clear()
            report = checks.run_checks(settings, quick=False, workers=args.workers, store=store)
            report["elapsed_s"] = round(computed, 1)
    files = checks.write_outputs(report, out)
    md = out / "check_full.md"
    shutil.move(out / "check_report.md", md)
    shutil.move(out / "check_report.json", out / "check_full.json")
    text = md.read_text(encoding="utf-8")
    md.write_text(text + f"\nthis pass: {misses} species computed, {hits} read from the result store, "
                  f"{computed:.0f} s (workers={args.workers})\n" + (f"{args.note}\n" if args.note else ""),
                  encoding="utf-8")
    print(md.read_text(encoding="utf-8"))
    print("written:", ", ".join(str(f) for f in files if f.suffix == ".png"), md, out / "check_full.json")


if __name__ == "__main__":
    main()
