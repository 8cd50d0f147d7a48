"""The plan of a study: species × tasks × solvents, the files it reads and writes, and its text description.

:func:`build_plan` resolves the species (inline and from files), the tasks
(each with the options its spec declares, :mod:`cationcalc.tasks.registry`),
the settings per solvent, the output folder and the store; paths are confined
to the workflow file's folder unless the user lifts that.  :func:`describe_plan`
is what ``cationcalc run --dry-run`` prints.

Example
-------
>>> import os, tempfile
>>> from cationcalc.studies.loading import load_workflow
>>> from cationcalc.studies.plan import build_plan
>>> path = os.path.join(tempfile.mkdtemp(), "tiny.yaml")
>>> _ = open(path, "w").write("study: tiny\\nspecies: ['C[C+](C)C']\\ntasks: [hia, thermo]\\n"
...                           "method: {solvent: [none, water]}\\n")
>>> plan = build_plan(load_workflow(path))
>>> plan.row_count, [s or "gas" for s in plan.solvents], plan.tasks[0].options
(4, ['gas', 'water'], {'reference': 'nearest class'})
"""

from __future__ import annotations

import dataclasses
import hashlib
import inspect
import stat
from pathlib import Path
from typing import Any, Iterator

from pydantic import BaseModel, ValidationError

from cationcalc.about import __version__
from cationcalc.chem.reference import NEAREST_CLASS
from cationcalc.chem.species import Species
from cationcalc.compute.models import Settings, species_key
from cationcalc.studies.loading import LoadedWorkflow
from cationcalc.studies.schema import KNOWN_TASKS, REFINE_OPTIONS, ExecutionSpec, Workflow, WorkflowError
from cationcalc.studies.species_files import SPECIES_SUFFIXES, read_species_file
from cationcalc.tasks.registry import TaskSpec, spec

#: never read from or written to, whatever a workflow says (kernel and device files)
_SYSTEM_FOLDERS = (Path("/proc"), Path("/sys"), Path("/dev"))
ALLOW_OUTSIDE = "--allow-outside-paths"


@dataclasses.dataclass
class PlannedTask:
    name: str
    options: dict  # the keyword options passed to the task's code
    runner: Any
    items: list[tuple[str, str]]

    @property
    def spec(self) -> TaskSpec:
        return spec(self.name)


@dataclasses.dataclass
class Plan:
    loaded: LoadedWorkflow
    items: list[tuple[str, str]]
    solvents: list[str | None]
    tasks: list[PlannedTask]
    settings: dict[str | None, Settings]
    output_dir: Path
    store_path: Path
    input_files: dict[str, str]  # path relative to the workflow → sha256
    workers: int
    scheduler: str
    force: bool
    formats: list[str]
    sources: dict = dataclasses.field(default_factory=dict)  # "inline" or a file → number of species

    @property
    def workflow(self) -> Workflow:
        return self.loaded.workflow

    @property
    def row_count(self) -> int:
        """Rows before tasks that give several records per input (species × tasks × solvents; a task at a
        level of its own, the rate task: species × media, once whatever the solvents)."""
        return sum(len(t.items) * (_passes(t) if t.spec.fixed_level else len(self.solvents)) for t in self.tasks)


def _passes(task: PlannedTask) -> int:
    """How many passes a task makes over its inputs (one per value of its ``one_pass_per`` option)."""
    per = task.spec.one_pass_per
    return len(task.options[per]) if per else 1


def _runner_for(name: str):
    """The callable that runs task ``name`` in this installation, or None."""
    from cationcalc.tasks import runner as tasks

    try:
        declared = spec(name)
    except ValueError:
        return None
    if declared.run is not None:
        return declared.run
    return tasks.run_task if name in getattr(tasks, "TASKS", ()) else None


def _task_options(options: BaseModel) -> dict:
    """The keyword options of a task's code: its options, DFT refinement options only when set."""
    out = options.model_dump()
    for key in REFINE_OPTIONS:
        out.pop(key, None)
        if getattr(options, key, None) is not None:
            out[key] = getattr(options, key)
    return out


def _accepts(runner, option: str) -> bool:
    params = inspect.signature(runner).parameters
    return option in params or any(p.kind is p.VAR_KEYWORD for p in params.values())


def _inside(path: Path, folder: Path) -> bool:
    try:
        path.relative_to(folder)
        return True
    except ValueError:
        return False


def confined_path(given: str, folder: Path, where: str, what: str, *, allow_outside: bool = False,
                  also: Path | None = None) -> Path:
    """``given`` resolved against ``folder`` (symlinks followed); WorkflowError when it leaves ``folder``
    (or ``also``) without ``allow_outside``, and always for /proc, /sys and /dev."""
    resolved = (folder / given).resolve()
    if any(_inside(resolved, system) for system in _SYSTEM_FOLDERS):
        raise WorkflowError(f"{where}: {what} {given!r} resolves to {resolved}, a system file; give a file of "
                            "your own")
    if not allow_outside and not _inside(resolved, folder) and not (also is not None and _inside(resolved, also)):
        raise WorkflowError(f"{where}: {what} {given!r} resolves to {resolved}, outside the workflow's folder "
                            f"{folder}; move it into that folder, or pass {ALLOW_OUTSIDE} to cationcalc run")
    return resolved


@dataclasses.dataclass
class _Species:
    """The study's species: (SMILES, name), the tasks each may run (None: all), files read, counts by source."""

    items: list[tuple[str, str]] = dataclasses.field(default_factory=list)
    restrictions: list[list[str] | None] = dataclasses.field(default_factory=list)
    input_files: dict[str, str] = dataclasses.field(default_factory=dict)
    sources: dict[str, int] = dataclasses.field(default_factory=dict)


def _species_file(loaded: LoadedWorkflow, index: int, entry, base: Path, allow_outside: bool) -> Path:
    """The checked path of species entry ``index``'s file."""
    where = f"{loaded.path}:{loaded.line_of(('species', index, 'file'))}"
    file_path = confined_path(entry.file, base, where, f"species file (key species[{index}].file)",
                              allow_outside=allow_outside)
    if not file_path.exists():
        raise WorkflowError(f"{where}: species file {entry.file!r} (key species[{index}].file) not found at "
                            f"{file_path}; give a path relative to the workflow file")
    if not stat.S_ISREG(file_path.stat().st_mode):
        raise WorkflowError(f"{where}: species file {entry.file!r} (key species[{index}].file) is not a "
                            "regular file; give a .smi, .csv or .sdf file")
    if entry.format == "auto" and file_path.suffix.lower() not in SPECIES_SUFFIXES:
        raise WorkflowError(f"{where}: species file {entry.file!r} (key species[{index}].file) does not end in "
                            f"{', '.join(SPECIES_SUFFIXES)}; rename it or set format: smi, csv or sdf")
    return file_path


def _read_species(loaded: LoadedWorkflow, base: Path, allow_outside: bool) -> _Species:
    found = _Species()
    for index, entry in enumerate(loaded.workflow.species):
        if entry.file is None:
            found.items.append((entry.smiles, entry.name))
            found.restrictions.append(entry.tasks)
            found.sources["inline"] = found.sources.get("inline", 0) + 1
            continue
        file_path = _species_file(loaded, index, entry, base, allow_outside)
        where = f"{loaded.path}:{loaded.line_of(('species', index, 'file'))}"
        found.input_files[entry.file] = hashlib.sha256(file_path.read_bytes()).hexdigest()
        read = read_species_file(file_path, entry.format, where)
        found.sources[entry.file] = found.sources.get(entry.file, 0) + len(read)
        for item in read:
            found.items.append(item)
            found.restrictions.append(entry.tasks)
    return found


def _plan_tasks(loaded: LoadedWorkflow, species: _Species) -> list[PlannedTask]:
    """Each selected task with its runner, its options and the species it runs on."""
    path = loaded.path
    planned: list[PlannedTask] = []
    for name, options in loaded.workflow.tasks.selected():
        where = f"{path}:{loaded.line_of(('tasks', name))}"
        runner = _runner_for(name)
        if runner is None:
            from cationcalc.tasks import runner as tasks

            available = [t for t in KNOWN_TASKS if _runner_for(t) is not None] or list(getattr(tasks, "TASKS", ()))
            raise WorkflowError(f"{where}: task {name!r} is not available in this cationcalc ({__version__}); "
                                f"remove it or use one of: {', '.join(available)}")
        kwargs = _task_options(options)
        for option in kwargs:
            if not _accepts(runner, option):
                raise WorkflowError(f"{where}: task {name!r} takes no option {option!r} in this cationcalc "
                                    f"({__version__}); remove the option")
        task_items = [item for item, only in zip(species.items, species.restrictions) if only is None or name in only]
        planned.append(PlannedTask(name, kwargs, runner, task_items))
    for index, entry in enumerate(loaded.workflow.species):
        for t in entry.tasks or []:
            if t not in [p.name for p in planned]:
                where = f"{path}:{loaded.line_of(('species', index, 'tasks'))}"
                raise WorkflowError(f"{where}: species entry {index} asks for task {t!r}, which the study's "
                                    "tasks: list does not run; add it there or remove it here")
    return planned


def _scheduler(loaded: LoadedWorkflow, scheduler: str | None) -> str:
    """The scheduler (the command line's, else the workflow's), checked and with Dask installed if needed."""
    if scheduler is not None:
        try:
            ExecutionSpec(scheduler=scheduler)
        except ValidationError:
            raise WorkflowError(f"--scheduler {scheduler!r}: use processes, dask-local or a Dask scheduler "
                                "address such as tcp://host:8786") from None
    scheduler = scheduler or loaded.workflow.execution.scheduler
    if scheduler != "processes":
        try:
            import distributed  # noqa: F401
        except ImportError:
            line = loaded.line_of(("execution", "scheduler"))
            raise WorkflowError(f"{loaded.path}:{line}: scheduler {scheduler!r} needs Dask: pip install "
                                "\"cationcalc[dask]\" (or use scheduler: processes)") from None
    return scheduler


def _output_paths(loaded: LoadedWorkflow, base: Path, output: str | None, allow_outside: bool) -> tuple[Path, Path]:
    """(output folder, store path), confined to the workflow's folder unless given on the command line."""
    wf, path = loaded.workflow, loaded.path
    if output is not None:
        output_dir = Path(output).resolve()
        if any(_inside(output_dir, system) for system in _SYSTEM_FOLDERS):
            raise WorkflowError(f"--output {output!r} is a system folder; give a folder of your own")
    elif wf.output.folder is not None:
        output_dir = confined_path(wf.output.folder, base, f"{path}:{loaded.line_of(('output', 'folder'))}",
                                   "output folder (key output.folder)", allow_outside=allow_outside)
    else:
        output_dir = (base / "cationcalc-output" / wf.study).resolve()
    store_path = confined_path(str(output_dir / wf.output.store), base,
                               f"{path}:{loaded.line_of(('output', 'store'))}", "store (key output.store)",
                               allow_outside=allow_outside or output is not None, also=output_dir)
    return output_dir, store_path


def build_plan(loaded: LoadedWorkflow, *, output: str | None = None, workers: int | None = None,
               scheduler: str | None = None, allow_outside: bool = False) -> Plan:
    """Resolve files, tasks and settings; raises WorkflowError (FILE:LINE: ...).

    Species files, the output folder and the store must resolve inside the workflow file's
    folder (the store may also sit in the output folder; ``output`` given here, and the store
    relative to it, are the user's own choice and are not confined) unless ``allow_outside``;
    species files must be regular files.  /proc, /sys and /dev are always refused.
    """
    from cationcalc.execution.executors import default_workers

    wf = loaded.workflow
    base = loaded.path.resolve().parent
    species = _read_species(loaded, base, allow_outside)
    planned = _plan_tasks(loaded, species)
    scheduler = _scheduler(loaded, scheduler)
    output_dir, store_path = _output_paths(loaded, base, output, allow_outside)
    return Plan(loaded=loaded, items=species.items, solvents=list(wf.method.solvent), tasks=planned,
                settings={s: wf.settings_for(s) for s in wf.method.solvent}, output_dir=output_dir,
                store_path=store_path, input_files=species.input_files, sources=species.sources,
                workers=workers or wf.execution.workers or default_workers(), scheduler=scheduler,
                force=wf.execution.force, formats=list(dict.fromkeys(wf.output.formats)))


def known_needs(task: PlannedTask, settings: Settings, force: bool
                ) -> tuple[list[Species], list[tuple[str, str]]] | None:
    """Species the task needs and the inputs it rejects; None for a task that finds its species as it goes
    (the shift search)."""
    from cationcalc.tasks import runner as tasks

    if task.spec.prepare is None:
        return None
    options = {"reference": NEAREST_CLASS, **task.options}
    groups = [tasks.prepare(task.name, t, n, settings, options, force) for t, n in task.items]
    needs = [sp for group in groups for p in group if p.error is None for sp in p.needs.values()]
    rejected = [(n or t, p.error) for (t, n), group in zip(task.items, groups) for p in group
                if p.error is not None]
    return list(dict.fromkeys(needs)), rejected


def task_in_solvent(task: PlannedTask, plan: Plan, solvent: str | None) -> tuple[PlannedTask, Settings] | None:
    """The task and the settings its species are computed at in this solvent of the plan; None where it does
    not run.  A task at a level of its own (the rate task) does not depend on the study's solvents: it runs
    once, at that level, and its species are the same for every value of the option it passes over."""
    declared = task.spec
    if declared.fixed_level is None:
        return task, plan.settings[solvent]
    if solvent != plan.solvents[0] or not task.items:
        return None
    options = dict(task.options)
    if declared.one_pass_per:
        options[declared.one_pass_per] = options[declared.one_pass_per][0]
    return PlannedTask(task.name, options, task.runner, task.items), declared.fixed_level(plan.settings[solvent])


def runs_in(task: PlannedTask, plan: Plan, solvent: str | None) -> bool:
    """Whether the task runs in this solvent of the plan (a task at a level of its own runs once)."""
    return bool(task.items) and (task.spec.fixed_level is None or solvent == plan.solvents[0])


def _row_label(task: PlannedTask, solvent: str | None) -> str:
    return "E_f level" if task.spec.fixed_level is not None else _label(solvent)


def _label(solvent: str | None) -> str:
    return solvent or "gas"


def planned_species_count(plan: Plan) -> int:
    """How many distinct species the plan lists before running (what the dry run calls distinct species)."""
    keys: set = set()
    for _, _, settings, found in planned_needs(plan):
        if found is not None:
            keys |= {species_key(sp.smiles, sp.charge, sp.multiplicity, settings) for sp in found[0]}
    return len(keys)


def planned_needs(plan: Plan) -> Iterator[tuple[str | None, PlannedTask, Settings, Any]]:
    """(solvent, task, settings, known_needs) for every task of the plan where it runs, in plan order."""
    for solvent in plan.solvents:
        for task in plan.tasks:
            placed = task_in_solvent(task, plan, solvent)
            if placed is not None:
                yield solvent, placed[0], placed[1], known_needs(placed[0], placed[1], plan.force)


def _describe_head(plan: Plan) -> list[str]:
    """Study, method, species, tasks and rows of the plan description."""
    wf = plan.workflow
    lines = [f"study {wf.study}: {plan.loaded.path} (sha256 {plan.loaded.sha256[:12]})"]
    if wf.description:
        lines.append(f"  {wf.description.strip()}")
    m = wf.method
    lines.append(f"  method     {m.method} with {m.engine}, {m.temperature_k} K; solvents: "
                 + ", ".join(_label(s) for s in plan.solvents))
    sources = ", ".join(f"{n} inline" if source == "inline" else f"{n} from {source}"
                        for source, n in plan.sources.items()) or "inline"
    lines.append(f"  species    {len(plan.items)} ({sources})")
    lines.append("  tasks      " + ", ".join(
        t.name + (f" ({', '.join(f'{k}={v}' for k, v in t.options.items())})" if t.options else "")
        for t in plan.tasks))
    own_level = [t for t in plan.tasks if t.spec.fixed_level is not None]
    lines.append(f"  rows       {sum(len(t.items) for t in plan.tasks if t.spec.fixed_level is None)} species×task × "
                 f"{len(plan.solvents)} solvent{'s' if len(plan.solvents) > 1 else ''}"
                 + "".join(f" + {len(t.items)} {t.name} × {_passes(t)} media" for t in own_level)
                 + f" = {plan.row_count}")
    return lines


def _describe_rows(plan: Plan, store) -> tuple[list[str], set, bool, list[str]]:
    """The per solvent × task table: (lines, species keys needed, a task finds its own, rejected notes)."""
    lines = ["", f"  {'solvent':<16}{'task':<13}{'inputs':>7}{'rejected':>10}{'species':>9}{'stored':>8}"]
    total_needed: set = set()
    unknown = False
    rejected_notes: list[str] = []
    for solvent, task, settings, found in planned_needs(plan):
        if found is None:
            unknown = True
            lines.append(f"  {_row_label(task, solvent):<16}{task.name:<13}{len(task.items):>7}{'?':>10}"
                         f"{'(task)':>9}{'':>8}")
            continue
        needs, rejected = found
        keys = {species_key(sp.smiles, sp.charge, sp.multiplicity, settings) for sp in needs}
        total_needed |= keys
        stored = store.count_present(keys) if store else 0
        lines.append(f"  {_row_label(task, solvent):<16}{task.name:<13}{len(task.items):>7}{len(rejected):>10}"
                     f"{len(keys):>9}{stored:>8}")
        for name, error in rejected:
            note = f"  rejected by {task.name}: {name}: {error}"
            if note not in rejected_notes:
                rejected_notes.append(note)
    return lines, total_needed, unknown, rejected_notes


def describe_plan(plan: Plan) -> str:
    """The expanded plan as text: species × tasks × solvents, with counts and what the store holds."""
    from cationcalc.execution.store import ResultStore

    store = ResultStore(plan.store_path) if plan.store_path.exists() else None
    lines = _describe_head(plan)
    rows, total_needed, unknown, rejected_notes = _describe_rows(plan, store)
    lines += rows
    stored_total = store.count_present(total_needed) if store else 0
    lines.append("")
    lines.append(f"  distinct species: {len(total_needed)}, {stored_total} already in the store, "
                 f"{len(total_needed) - stored_total} to compute"
                 + ("; tasks marked (task) find their own species at run time" if unknown else "")
                 + ("; 1,2-shift products of the cations formed are found during the run and come on top"
                    if any("shifts" in t.spec.options.model_fields and t.options.get("shifts", True)
                           and t.spec.prepare is not None for t in plan.tasks)
                    else ""))
    lines.extend(rejected_notes[:20])
    if len(rejected_notes) > 20:
        lines.append(f"  ... and {len(rejected_notes) - 20} more rejected inputs")
    where = {"processes": f"local process pool, {plan.workers} worker{'s' if plan.workers > 1 else ''}",
             "dask-local": f"local Dask cluster, {plan.workers} worker{'s' if plan.workers > 1 else ''}"}
    lines.append(f"  execution  {where.get(plan.scheduler, f'Dask scheduler {plan.scheduler}')}")
    lines.append(f"  output     {plan.output_dir} ({', '.join(plan.formats)}); store {plan.store_path}")
    if store:
        store.close()
    return "\n".join(lines)


__all__ = ["Plan", "PlannedTask", "build_plan", "describe_plan", "known_needs", "task_in_solvent", "runs_in",
           "planned_needs", "planned_species_count", "confined_path", "ALLOW_OUTSIDE", "SPECIES_SUFFIXES"]
