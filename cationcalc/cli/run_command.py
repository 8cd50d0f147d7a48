"""``cationcalc run``: run a study from its YAML workflow file (the command line over cationcalc.studies)."""

from __future__ import annotations

import argparse
import sys

from cationcalc.about import SAFETY_NOTE
from cationcalc.chem import species as _species  # noqa: F401  (imported for its side effect: RDKit's parser stays quiet)
from cationcalc.cli.arguments import Parser, positive_int_arg
from cationcalc.execution.store import StoreError
from cationcalc.studies.workflow import (ALLOW_OUTSIDE, WorkflowError, build_plan, check_writable, describe_plan,
                                         load_workflow, planned_species_count, run_plan)


def _parser() -> argparse.ArgumentParser:

    parser = Parser(
        prog="cationcalc run",
        description="Run a study: a YAML workflow file (method, species, tasks, outputs). Species already in the "
                    "result store are read, not recomputed; a killed run resumes where it stopped.",
        epilog="Example studies: workflows/*.yaml. Exit status: 0 all rows computed, 1 some rows failed, "
               "2 bad workflow or usage, 130 interrupted (finished species stay in the store).")
    parser.add_argument("workflow", metavar="STUDY.yaml", help="the workflow file")
    parser.add_argument("--dry-run", action="store_true", help="print the expanded plan and stop")
    parser.add_argument("--workers", type=positive_int_arg, default=None,
                        help="worker processes, 1 or more (default: execution.workers, else one per core)")
    parser.add_argument("--scheduler", default=None,
                        help="processes, dask-local or a Dask address tcp://host:8786 (overrides execution.scheduler)")
    parser.add_argument("--output", default=None, help="output folder (overrides output.folder)")
    parser.add_argument("--quiet", action="store_true", help="no plan, progress bar or table; only the summary")
    parser.add_argument(ALLOW_OUTSIDE, action="store_true",
                        help="let species files, output.folder and output.store lie outside the workflow file's "
                             "folder (system folders /proc, /sys, /dev stay refused)")
    return parser


def _error(message: str) -> int:
    print(f"cationcalc run: error: {message}", file=sys.stderr)
    return 2


def _print_summary(records: list[dict]) -> None:
    """One small table per task with its headline quantity (declared in the task's spec) (± error, and the verdict where there is one):
    name × solvent, sorted by the first solvent.  Headers come from the task's reading view."""
    from rich.console import Console
    from rich.markup import escape
    from rich.table import Table

    from cationcalc.report.columns import VIEWS, Column, cell
    from cationcalc.report.outputs import TASK_TITLES, _label
    from cationcalc.studies.schema import KNOWN_TASKS
    from cationcalc.tasks.registry import spec

    console = Console(width=max(100, Console().width))
    for task in dict.fromkeys(r.get("task") for r in records):
        if task == "rate":  # name × medium: half-life and the verdict in time
            _print_rate_summary(console, [r for r in records if r.get("task") == "rate" and not r.get("error")])
            continue
        key = spec(task).headline if task in KNOWN_TASKS else None
        if key is None:
            continue
        column = next((c for c in VIEWS.get(task, ()) if c.key == key), None) or Column(key, key, "value")
        rows = [r for r in records if r.get("task") == task and r.get(key) is not None]
        if not rows:
            continue
        solvents = list(dict.fromkeys(r.get("solvent", "none") for r in rows))
        verdicts = any(r.get("verdict") for r in rows)
        table = Table(title=f"{TASK_TITLES.get(task, task)}: {column.header}" + (", verdict" if verdicts else ""),
                      title_justify="left")
        table.add_column("name")
        for s in solvents:
            table.add_column("gas" if s == "none" else s, justify="right")
        by_name: dict[str, dict] = {}
        for r in rows:
            by_name.setdefault(_label(r), {})[r.get("solvent", "none")] = r
        first = solvents[0]

        def order_key(n):
            r = by_name[n].get(first)
            return (r is None, r[key] if r else 0)

        for name in sorted(by_name, key=order_key):
            cells = []
            for s in solvents:
                r = by_name[name].get(s)
                text = "" if r is None else cell(column, r) + (f" · {r['verdict']}" if r.get("verdict") else "")
                cells.append(escape(text))
            table.add_row(escape(name), *cells)
        console.print(table)


def _print_rate_summary(console, rows: list[dict]) -> None:
    from rich.markup import escape
    from rich.table import Table

    from cationcalc.report.outputs import TASK_TITLES, _label

    if not rows:
        return
    media = list(dict.fromkeys(r.get("medium") for r in rows))
    table = Table(title=f"{TASK_TITLES['rate']}: half-life (range from the lg k uncertainty), verdict",
                  title_justify="left")
    table.add_column("name")
    for m in media:
        table.add_column(str(m), justify="right")
    by_name: dict[str, dict] = {}
    for r in rows:
        by_name.setdefault(_label(r), {})[r.get("medium")] = r
    first = media[0]

    def order_key(name):
        r = by_name[name].get(first)
        return (r is None or r.get("half_life_s") is None, (r or {}).get("half_life_s") or 0.0)

    for name in sorted(by_name, key=order_key):
        cells = []
        for m in media:
            r = by_name[name].get(m)
            if r is None:
                cells.append("")
            elif r.get("half_life_s") is None:
                cells.append(escape(str(r.get("verdict") or r.get("rate_note") or "")))
            else:
                cells.append(escape(f"{r['half_life_text']} ({r['half_life_range_text']}) · {r['verdict']}"))
        table.add_row(escape(name), *cells)
    console.print(table)


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else list(argv)
    parser = _parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:
        return int(exc.code or 0)
    from cationcalc.execution.executors import stop_signal, terminate_as_interrupt

    try:
        plan = build_plan(load_workflow(args.workflow), output=args.output, workers=args.workers,
                          scheduler=args.scheduler, allow_outside=args.allow_outside_paths)
        if args.dry_run:
            print(describe_plan(plan))
            print(SAFETY_NOTE)
            return 0
        check_writable(plan)
        if not args.quiet:
            print(describe_plan(plan), flush=True)
        with terminate_as_interrupt():
            outcome = run_plan(plan, show_progress=sys.stderr.isatty() and not args.quiet)
    except WorkflowError as exc:
        return _error(str(exc))
    except StoreError as exc:
        return _error(str(exc))
    except ValueError as exc:  # e.g. an unreachable Dask scheduler
        return _error(str(exc).splitlines()[0])
    except KeyboardInterrupt:
        print(f"\ncationcalc run: {'stopped by SIGTERM' if stop_signal() == 'SIGTERM' else 'interrupted'}; "
              "finished species stay in the result store; run the same command again to resume", file=sys.stderr)
        return 143 if stop_signal() == "SIGTERM" else 130
    species_line = (f"species: {outcome.computed} computed, {outcome.failed} failed, {outcome.reused} read from "
                    f"the store; {outcome.elapsed_s:.1f} s")
    planned = planned_species_count(plan)
    extra = outcome.computed + outcome.failed + outcome.reused - planned
    if extra > 0:
        species_line += (f" (the plan listed {planned}; the other {extra} were found during the run: 1,2-shift "
                         "products of the cations formed, and species of tasks that search for their own)")
    if outcome.interrupted:
        why = "stopped by SIGTERM" if stop_signal() == "SIGTERM" else "interrupted"
        print(f"\ncationcalc run: {why} ({species_line}); finished species are in {plan.store_path}; run "
              "the same command again to resume", file=sys.stderr)
        return 143 if stop_signal() == "SIGTERM" else 130
    if not args.quiet:
        _print_summary(outcome.records)
    errors = sum(1 for r in outcome.records if r.get("error"))
    print(f"{len(outcome.records)} rows ({errors} with errors); {species_line}")
    report = plan.output_dir / "report.html"
    print(f"outputs in {plan.output_dir}" + (f" (open {report})" if report in outcome.files else ""))
    print(SAFETY_NOTE)
    if outcome.write_problem:
        print(f"cationcalc run: error: {outcome.write_problem}", file=sys.stderr)
        return 1
    return 1 if errors else 0


