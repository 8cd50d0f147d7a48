"""The task runner: from inputs to records for any task the registry declares.

Each task has two halves, declared in its spec (:mod:`cationcalc.tasks.registry`).
``prepare`` validates the input and lists the species to compute (errors become a
record with ``error``, so the rest of a batch still runs); ``finish`` turns
computed species results into one flat record with the keys the command line,
JSON and CSV share.  Species shared between inputs (the reference cation, a
common leaving group) are computed once because :func:`run_task` computes the
union of all requests.  The run reads top to bottom: prepare, compute, finish,
refine, collate, the task's further steps, error bars.

Example
-------
>>> from cationcalc.tasks.runner import run_task
>>> from cationcalc.compute.models import Settings
>>> [r["symmetry_number"] for r in run_task("thermo", [("O", "water")], Settings())]
[2]
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from cationcalc.about import SAFETY_NOTE
from cationcalc.chem.reference import NEAREST_CLASS
from cationcalc.compute.models import Settings
from cationcalc.execution.executors import Interrupted, Progress, SpeciesFailure, compute_many
from cationcalc.execution.lowest import settle_lowest
from cationcalc.execution.store import ResultStore
from cationcalc.tasks.record_types import Record, typed_records
from cationcalc.tasks.records import BatchInterrupted, Prepared
from cationcalc.tasks.registry import StepContext, TaskNames, TaskSpec, spec


#: the tasks :func:`run_task` runs, read from the registry (shifts runs itself)
TASKS: Sequence[str] = TaskNames(lambda t: t.prepare is not None)


def prepare(task: str, text: str, name: str, settings: Settings, options: dict, force: bool) -> list[Prepared]:
    """Validate one input of a task: the prepared requests (one, or one per site/leaving group)."""
    return spec(task).prepare(text, name, settings, options, force)


def _error_record(p: Prepared, error: str) -> dict:
    return {**p.base, "error": error, "warnings": [], "rearranged": False}


def _finish(group: list[Prepared], results: dict) -> list[dict]:
    """The records of one input's requests: finished, or the error of the input or of a failed species."""
    finished = []
    for p in group:
        if p.error is not None:
            finished.append(_error_record(p, p.error))
            continue
        failed = [f"{role} {sp.smiles}: {results[sp].message}" for role, sp in p.needs.items()
                  if isinstance(results[sp], SpeciesFailure)]
        if failed:
            finished.append(_error_record(p, "; ".join(failed)))
            continue
        finished.append(p.finish({role: results[sp] for role, sp in p.needs.items()}))
    return finished


def plan_summary(groups: list[list[Prepared]]) -> str:
    """One line: species the requests name, the duplicates removed before anything runs, those left.

    >>> from cationcalc.chem.species import Species
    >>> tbu = Species("C[C+](C)C", 1, 1)
    >>> plan_summary([[Prepared({}, {"cation": tbu, "reference_cation": tbu})]])
    'plan: 2 species requested by 1 input, 1 duplicate removed, 1 distinct'
    """
    needed = [sp for group in groups for p in group if p.error is None for sp in p.needs.values()]
    distinct = len(dict.fromkeys(needed))
    removed = len(needed) - distinct
    return (f"plan: {len(needed)} species requested by {len(groups)} input{'s' if len(groups) != 1 else ''}, "
            f"{removed} duplicate{'s' if removed != 1 else ''} removed, {distinct} distinct")


def _compute(groups: list[list[Prepared]], settings: Settings, ctx: dict) -> tuple[dict, bool]:
    """Every species the requests need, computed once: (results, interrupted)."""
    needed = [sp for group in groups for p in group if p.error is None for sp in p.needs.values()]
    try:
        return compute_many(needed, settings, **ctx), False
    except Interrupted as exc:
        return exc.results, True


def _refine(task: TaskSpec, groups, finished_groups, results, settings, options, ctx) -> tuple[list, bool]:
    """DFT refinement tier: records rebuilt from refined species; (groups, interrupted)."""
    try:
        return task.refine(task.name, groups, finished_groups, results, settings, options,
                           workers=ctx["workers"], force=ctx["force"], store=ctx["store"]), False
    except KeyboardInterrupt:  # keep the GFN2-xTB records, labelled as not refined
        from cationcalc.execution.refine import mark_unrefined

        return [mark_unrefined(finished, settings.level) for finished in finished_groups], True


def _annotate(task: TaskSpec, records: list[dict], settings: Settings, options: dict, refined: bool) -> list[dict]:
    """Error bars (and calibration on request) through the task's uncertainty hook."""
    calibrated = bool(options.get("calibrated", False))
    records = task.uncertainty(task.name, records, settings, calibrated=calibrated and not refined)
    if refined:
        from cationcalc.execution.refine import relabel_uncertainties

        records = relabel_uncertainties(records, calibrated=calibrated)
    return records


def _one_pass_each(task: TaskSpec, options: dict) -> list | None:
    """The values of the option the task runs one pass per (several media), or None for one pass."""
    values = options.get(task.one_pass_per) if task.one_pass_per else None
    return list(values) if isinstance(values, (list, tuple)) and len(values) > 1 else None


def run_task(task: str, items: list[tuple[str, str]], settings: Settings, *, reference: str = NEAREST_CLASS,
             workers: int = 1, force: bool = False, progress: Progress | None = None,
             store: ResultStore | None = None, **options: Any) -> list[Record]:
    """Run one task over (input, name) pairs; typed records (:mod:`cationcalc.tasks.record_types`) in input order.

    ``hia``, ``heterolysis``, ``thermo`` and ``ionize`` give one record per
    input; ``sites`` and ``ladder`` one per site or leaving group, ranked.
    Options: ``reference`` (HIA anchor: a name, or the default nearest class), and for the ionization tasks
    ``leaving_group`` (name or 'auto'), ``acid``, ``reference_substrate``
    (SMILES of the substrate ΔΔG_ion is measured against), ``hydride``
    (sites: scan C–H bonds even when a leaving group is present), ``groups``
    (ladder: restrict to these leaving groups), ``shifts`` (ionize/sites: add
    the downhill 1,2-shifts of every cation formed).  ``refine`` (a DFT level
    such as ``wB97X-D3BJ/def2-TZVP``): DFT single points on the GFN2-xTB
    structures (:mod:`cationcalc.execution.refine`); refined values take the usual keys,
    the GFN2-xTB ones sit beside them with ``_xtb`` before the unit;
    ``refine_top_k`` / ``refine_window_kcal_mol`` refine only the best
    requests of a ranking, ``refine_log`` receives the cost estimates, ``plan_log`` the line of
    :func:`plan_summary` (species requested, duplicates removed) before anything is computed.

    ``store`` (optional) is passed to :func:`~cationcalc.execution.executors.compute_many`
    so species already computed with the same settings are read, not recomputed.
    """
    if task not in TASKS:
        raise ValueError(f"unknown task {task!r}: choose one of {', '.join(TASKS)}")
    declared = spec(task)
    options = {"reference": reference, **options}
    several = _one_pass_each(declared, options)
    if several is not None:  # one pass each, species shared through the store
        rest = {k: v for k, v in options.items() if k not in ("reference", declared.one_pass_per)}
        return [r for value in several for r in run_task(
            task, items, settings, reference=reference, workers=workers, force=force, progress=progress,
            store=store, **{declared.one_pass_per: value}, **rest)]
    if declared.fixed_level is not None:  # e.g. species at the E_f calibration's level
        settings = declared.fixed_level(settings)
    ctx = dict(workers=workers, force=force, progress=progress, store=store)
    return _run(declared, items, settings, options, ctx)


def _run(task: TaskSpec, items, settings: Settings, options: dict, ctx: dict) -> list[Record]:
    """prepare → funnel → compute → finish → refine → collate → further steps → error bars.

    A species a further step recomputed from a lower structure (a shift product that relaxed into
    its cation below the cation's lowest conformer) replaces its result, and the records are
    finished again from there (the steps reuse what they computed).
    """
    groups = [task.prepare(text, name, settings, options, ctx["force"]) for text, name in items]
    if task.funnel is not None:
        groups = task.funnel(groups, settings, options, ctx)
    if options.get("plan_log"):
        options["plan_log"](plan_summary(groups))
    results, interrupted = _compute(groups, settings, {k: ctx[k] for k in ("workers", "progress", "store")})
    if not interrupted:
        results.update(settle_lowest(results, settings, store=ctx["store"]))
    computed: dict = {}
    for _ in range(MAX_PASSES):
        step_ctx = StepContext(task.name, settings, results, **ctx, computed=computed)
        records, refined, interrupted = _records(task, groups, results, settings, options, ctx, step_ctx,
                                                 interrupted)
        stale = {sp: r for sp, r in step_ctx.lowered.items() if sp in results}
        if interrupted or not stale:
            break
        results = {**results, **stale}
    if task.uncertainty is not None:
        records = _annotate(task, records, settings, options, refined)
    records = typed_records(task.name, records)  # typed records from here on
    if interrupted:
        raise BatchInterrupted(records)
    return records


#: passes of finish → … → further steps: a second one when a step found a lower structure of a species
MAX_PASSES = 2


def _records(task: TaskSpec, groups, results: dict, settings: Settings, options: dict, ctx: dict,
             step_ctx: StepContext, interrupted: bool) -> tuple[list[dict], bool, bool]:
    """finish → refine → collate → further steps: (records, refined, interrupted)."""
    finished_groups = [_finish(group, results) for group in groups]
    refined = bool(options.get("refine")) and not interrupted and task.refine is not None
    if refined:
        finished_groups, interrupted = _refine(task, groups, finished_groups, results, settings, options, ctx)
        refined = not interrupted
    records = [r for finished in finished_groups for r in task.collate(finished, settings)]
    for step in task.after:
        if interrupted:
            break
        try:
            records = step(records, options, step_ctx)
        except Interrupted:
            interrupted = True
    return records, refined, interrupted


__all__ = ["run_task", "prepare", "TASKS", "SAFETY_NOTE"]
