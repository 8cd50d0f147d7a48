"""Running a study: every known species computed once through the store, then the tasks, then the files.

A second run of an unchanged study reads everything from the store and
rewrites identical files; Ctrl-C leaves the finished species in the store.

Example
-------
>>> from cationcalc.studies.runner import Outcome
>>> Outcome(records=[], files=[], computed=0, failed=0, reused=3, elapsed_s=0.1).interrupted
False
"""

from __future__ import annotations

import dataclasses
import json
import os
import tempfile
import time
from pathlib import Path

from cationcalc.compute.models import Settings, species_key
from cationcalc.studies.loading import load_workflow
from cationcalc.studies.plan import Plan, build_plan, planned_needs, runs_in
from cationcalc.studies.schema import WorkflowError

@dataclasses.dataclass
class Outcome:
    """What a run did: records, files, and how many species were computed or read."""

    records: list[dict]
    files: list[Path]
    computed: int
    failed: int
    reused: int
    elapsed_s: float
    interrupted: bool = False
    #: why the result store or the output files could not be written (the run's results were kept), or ""
    write_problem: str = ""


class _Progress:
    """Species done, failed and remaining with an ETA (rich, on stderr, only for a terminal)."""

    def __init__(self, total: int, enabled: bool):
        self.done = 0
        self.failed = 0
        self.keys: set[str] = set()
        self.total = total
        self._bar = None
        if enabled and total:
            from rich.console import Console
            from rich.progress import BarColumn, Progress, TextColumn, TimeRemainingColumn

            self._bar = Progress(TextColumn("species"), BarColumn(),
                                 TextColumn("{task.fields[done]} done, [red]{task.fields[failed]} failed[/red], "
                                            "{task.fields[remaining]} remaining"),
                                 TextColumn("ETA"), TimeRemainingColumn(),
                                 console=Console(stderr=True), transient=True)
            self._task = self._bar.add_task("species", total=total, done=0, failed=0, remaining=total)
            self._bar.start()

    def callback(self, settings: Settings):
        def progress(sp, result) -> None:
            from cationcalc.execution.executors import SpeciesFailure

            self.keys.add(species_key(sp.smiles, sp.charge, sp.multiplicity, settings))
            if isinstance(result, SpeciesFailure):
                self.failed += 1
            else:
                self.done += 1
            self.total = max(self.total, self.done + self.failed)
            if self._bar is not None:
                self._bar.update(self._task, total=self.total, completed=self.done + self.failed, done=self.done,
                                 failed=self.failed, remaining=self.total - self.done - self.failed)
        return progress

    def stop(self) -> None:
        if self._bar is not None:
            self._bar.stop()


def check_writable(plan: Plan) -> None:
    """Refuse, before anything is computed, an output folder that cannot be made or written."""
    out = plan.output_dir
    if out.exists() and not out.is_dir():
        raise WorkflowError(f"output folder {str(out)!r} is an existing file, not a folder; give another "
                            "output: folder (or --output)")
    probe = out
    while not probe.exists() and probe.parent != probe:
        probe = probe.parent
    if not probe.is_dir():
        raise WorkflowError(f"output folder {str(out)!r} cannot be made: {str(probe)!r} is a file; give another "
                            "output: folder (or --output)")
    if not os.access(probe, os.W_OK | os.X_OK):
        raise WorkflowError(f"output folder {str(out)!r} is not writable ({str(probe)!r}); give another "
                            "output: folder (or --output)")


def _rescue_records(plan: Plan, records: list[dict]) -> Path | None:
    """results.json of a run whose output folder failed, written to the system temp folder (or None)."""
    from cationcalc.report.outputs import finite

    try:
        handle, name = tempfile.mkstemp(prefix=f"cationcalc-{plan.workflow.study}-", suffix=".json")
        with os.fdopen(handle, "w", encoding="utf-8") as out:
            json.dump(finite(records), out, indent=1, ensure_ascii=False, allow_nan=False, default=str)
        return Path(name)
    except OSError:
        return None


def _prefetch(plan: Plan, store) -> list[tuple[Settings, list]]:
    """Every species whose need is known, grouped by the settings it is computed at (all solvents)."""
    prefetch: dict[str, tuple[Settings, list]] = {}
    for _, _, settings, found in planned_needs(plan):
        if found:
            wanted = prefetch.setdefault(settings.model_dump_json(), (settings, []))[1]
            wanted.extend(sp for sp in found[0] if sp not in wanted)
    return list(prefetch.values())


def _compute_and_run(plan: Plan, store, bar: _Progress, prefetch: list[tuple[Settings, list]]) -> list[dict]:
    """1. the known species through one pool per settings; 2. the tasks (species from the store, or found by
    the task itself).  Raises KeyboardInterrupt (or Interrupted, BatchInterrupted) when stopped."""
    from cationcalc.execution.executors import compute_many, scheduler_context, sigint_guard, sigint_seen

    records: list[dict] = []
    with sigint_guard(), scheduler_context(plan.scheduler, plan.workers):
        for settings, wanted in prefetch:
            if wanted:
                compute_many(wanted, settings, workers=plan.workers, progress=bar.callback(settings), store=store)
            if sigint_seen():
                raise KeyboardInterrupt
        for solvent in plan.solvents:
            settings = plan.settings[solvent]
            for task in plan.tasks:
                if not runs_in(task, plan, solvent):
                    continue  # a task at a level of its own does not depend on the study's solvents: run once
                common = dict(workers=plan.workers, force=plan.force, progress=bar.callback(settings), store=store)
                if task.spec.run is not None:
                    rows = task.runner(task.items, settings, **task.options, **common)
                else:
                    rows = task.runner(task.name, task.items, settings, **task.options, **common)
                if sigint_seen():  # a library swallowed Ctrl-C: the rows may be partial
                    raise KeyboardInterrupt
                for row in rows:  # a new flat record: the task first, without the profile
                    records.append({"task": task.name, **{k: v for k, v in row.items() if k != "profile"}})
    return records


def _store_problem(plan: Plan, store) -> str:
    if not store.write_error:
        return ""
    return (f"the result store {plan.store_path} could not be written ({store.write_error}); species "
            "computed after that are in the outputs only")


def _write(plan: Plan, records: list[dict], store) -> tuple[list[Path], str]:
    """The output files, and what could not be written ("" when all was)."""
    problem = _store_problem(plan, store)
    from cationcalc.report.outputs import write_outputs

    try:
        return write_outputs(plan, records, store), problem
    except OSError as exc:  # disk full, folder removed or made read-only during the run
        kept = _rescue_records(plan, records)
        problem = "; ".join(filter(None, [problem, (
            f"cannot write the outputs to {plan.output_dir} ({exc.strerror or exc}); "
            + (f"the records are saved in {kept}; " if kept else "")
            + f"the species are in {plan.store_path}: free or fix the folder and run the same command "
            "again (nothing is recomputed), or give --output FOLDER")]))
        return [], problem


def run_plan(plan: Plan, *, show_progress: bool = False, write: bool = True) -> Outcome:
    """Compute and write a study; returns an :class:`Outcome` (``interrupted`` after Ctrl-C, nothing written)."""
    from cationcalc.execution.executors import Interrupted
    from cationcalc.execution.store import ResultStore
    from cationcalc.tasks.records import BatchInterrupted

    start = time.perf_counter()
    if write:
        check_writable(plan)
    store = ResultStore(plan.store_path)
    try:
        prefetch = _prefetch(plan, store)
        missing = sum(1 for settings, sps in prefetch for sp in sps
                      if species_key(sp.smiles, sp.charge, sp.multiplicity, settings) not in store)
        bar = _Progress(missing, show_progress)
        try:
            records = _compute_and_run(plan, store, bar, prefetch)
        except (Interrupted, BatchInterrupted, KeyboardInterrupt):
            bar.stop()
            return Outcome(records=[], files=[], computed=bar.done, failed=bar.failed,
                           reused=len(store.hit_keys - bar.keys), elapsed_s=time.perf_counter() - start,
                           interrupted=True)
        bar.stop()
        files, problem = _write(plan, records, store) if write else ([], _store_problem(plan, store))
        return Outcome(records=records, files=files, computed=bar.done, failed=bar.failed,
                       reused=len(store.hit_keys - bar.keys), elapsed_s=time.perf_counter() - start,
                       write_problem=problem)
    finally:
        store.close()


def run_study(path: str | os.PathLike, *, output: str | None = None, workers: int | None = None,
              scheduler: str | None = None, show_progress: bool = False, allow_outside: bool = False) -> Outcome:
    """Load, plan, run and write a study (library entry point)."""
    return run_plan(build_plan(load_workflow(path), output=output, workers=workers, scheduler=scheduler,
                               allow_outside=allow_outside), show_progress=show_progress)


__all__ = ["Outcome", "run_plan", "run_study", "check_writable"]
