"""``cationcalc check``: recompute the bundled reference sets (the command line over cationcalc.checks)."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from cationcalc.checks.literature import format_report, reference_sets, run_checks, write_outputs
from cationcalc.cli.arguments import Parser, positive_int_arg
from cationcalc.compute.models import Settings


def build_parser() -> argparse.ArgumentParser:

    p = Parser(prog="cationcalc check", description="Recompute the bundled reference sets "
                                "(gas-phase HIA, σ⁺, Mayr E, pKR⁺) and trend checks; print statistics and write plots.")
    p.add_argument("--quick", action="store_true", help="a small subset of cheap species (a re-run reads the store)")
    p.add_argument("--solvent", default="none", help="medium of the HIA sets and trends (default gas); the Mayr set "
                   "is always in dichloromethane and the pKR+ set in water, as measured, and the σ+ protocol sets "
                   "(*_solution) in acetone, standing for the 90%% aqueous acetone of the σ+ definition")
    p.add_argument("--engine", default="tblite", choices=["tblite", "xtb"], help="GFN2-xTB implementation")
    p.add_argument("--workers", type=positive_int_arg, default=None, help="processes, 1 or more (default: one per core)")
    p.add_argument("--output", default="cationcalc-check", help="folder for the report, plots and result store")
    p.add_argument("--sets", default=None, help="comma-separated set keys (default: all)")
    p.add_argument("--no-plots", action="store_true", help="skip the PNG plots")
    p.add_argument("--json", action="store_true", help="print the report as JSON")
    return p


def main(argv: list[str] | None = None) -> int:
    """``cationcalc check``; exit 0 when every reference species was computed, 1 otherwise, 2 for bad usage."""
    from cationcalc.engines.solvents import normalise_solvent
    from cationcalc.execution.executors import default_workers
    from cationcalc.execution.store import ResultStore

    try:
        args = build_parser().parse_args(sys.argv[1:] if argv is None else list(argv))
    except SystemExit as exc:  # one-line usage error (or --help)
        return int(exc.code or 0)
    try:
        solvent = normalise_solvent(args.solvent)
    except ValueError as exc:
        print(f"cationcalc: error: {exc}", file=sys.stderr)
        return 2
    known = reference_sets()
    sets = [s.strip() for s in args.sets.split(",")] if args.sets else None
    if sets and any(s not in known and s != "rates" for s in sets):
        print(f"cationcalc: error: unknown set in {args.sets!r}: choose from {', '.join(known)}, rates",
              file=sys.stderr)
        return 2
    if args.workers is not None and args.workers < 1:
        print("cationcalc: error: --workers must be at least 1", file=sys.stderr)
        return 2
    if args.engine == "xtb":
        try:
            import xtb  # noqa: F401
        except ImportError:
            print("cationcalc: error: engine 'xtb' needs xtb-python: pip install 'cationcalc[xtb]' (Python <= 3.11)",
                  file=sys.stderr)
            return 2
    settings = Settings(engine=args.engine, solvent=solvent)
    workers = args.workers or default_workers()
    out = Path(args.output)
    with ResultStore(out / "store.sqlite") as store:
        report = run_checks(settings, quick=args.quick, workers=workers, store=store, sets=sets)
    write_outputs(report, out, plots=not args.no_plots)
    if args.json:
        print(json.dumps(report, indent=1, ensure_ascii=False, default=float))
    else:
        print(format_report(report))
    failed = any(e.get("error") for s in report["sets"].values() for e in s["entries"]) or any(
        e.get("error") for e in (report.get("kinetics") or {}).get("entries", []))
    return 1 if failed else 0

