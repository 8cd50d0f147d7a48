"""The task contract: one :class:`TaskSpec` per task, declared once in the task's own module.

A spec says what a task is (name, one-line help, report titles), what it takes
(its options model: pydantic, each field with its default and description
written once) and what it does (how it prepares the species it needs, how it
collates the records of one input, the steps after that, its refinement and
uncertainty hooks).  The command line, the workflow schema, the report tables
and the runner read the specs; adding a task is one module that registers its
spec (and its tests).

Example
-------
>>> from cationcalc.tasks.registry import spec, task_names
>>> task_names()[:3]
['hia', 'heterolysis', 'thermo']
>>> spec("hia").options().reference, spec("shifts").options().depth
('nearest class', 3)
"""

from __future__ import annotations

import importlib
import pkgutil
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, Callable

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator
from pydantic.fields import FieldInfo

from cationcalc.compute.models import Settings
from cationcalc.tasks.views import Column

#: the modules that declare the built-in tasks, in the order the command line and the workflow list them (a task
#: module not listed here is found too, and listed after these)
TASK_MODULES = ("cationcalc.tasks.hia", "cationcalc.tasks.heterolysis", "cationcalc.tasks.thermo",
                "cationcalc.tasks.ionization", "cationcalc.tasks.shifts", "cationcalc.tasks.rate")
#: options every refinable task takes (DFT single points on the GFN2-xTB structures)
REFINE_OPTIONS = ("refine", "refine_top_k", "refine_window_kcal_mol", "refine_geometry")


def option(default: Any = ..., description: str = "", *, flag: str | None = None, cli_help: str | None = None,
           comma_list: bool = False, metavar: str | None = None, **constraints: Any) -> Any:
    """A task option: default and description written once; ``flag`` names the command-line option when it
    is not ``--name-with-dashes``, ``cli_help`` words a negated flag (``--no-shifts``), ``comma_list`` reads
    a list as one comma-separated argument, ``metavar`` names its value in the help (default: the flag).  ``{default}`` in the description is filled in."""
    extra = {"flag": flag, "cli_help": cli_help, "comma_list": comma_list, "metavar": metavar}
    if "{default" in description and default is not ...:
        description = description.format(default=default)
    return Field(default, description=description, json_schema_extra={"cli": extra}, **constraints)


class TaskOptions(BaseModel):
    """Base of every task's options: unknown keys are refused, values are frozen."""

    model_config = ConfigDict(extra="forbid", frozen=True)


class RefinableOptions(TaskOptions):
    """DFT refinement of a task's species (cationcalc.execution.refine): a level, optionally only the best."""

    refine: str | None = Field(None, description="DFT level, e.g. wB97X-D3BJ/def2-TZVP (true: the default level)")
    refine_top_k: int | None = Field(None, ge=1, description="refine only the k best requests of the ranking")
    refine_window_kcal_mol: float | None = Field(None, ge=0, description="refine only those within this of the best")
    refine_geometry: str | None = Field(None, description="optimise each structure at this gas-phase DFT level "
                                        "before the single point (true: B3LYP-D3BJ/def2-SVP)")

    @field_validator("refine_geometry", mode="before")
    @classmethod
    def _geometry_level(cls, value):
        from cationcalc.execution.refine import parse_geometry_level

        level = parse_geometry_level(value)
        return None if level is None else level.name

    @field_validator("refine", mode="before")
    @classmethod
    def _level(cls, value):
        from cationcalc.execution.refine import DEFAULT_LEVEL, parse_level

        if value is True:
            value = DEFAULT_LEVEL
        if value is None or value is False:
            return None
        return parse_level(str(value)).label  # RefineError (a ValueError) lists the offered levels

    @model_validator(mode="after")
    def _selection_needs_level(self):
        if self.refine is None and (self.refine_top_k is not None or self.refine_window_kcal_mol is not None
                                    or self.refine_geometry is not None):
            raise ValueError("refine_top_k, refine_window_kcal_mol and refine_geometry need refine: LEVEL")
        return self


@dataclass(frozen=True)
class StepContext:
    """What a step after collation may use: the task, its settings and how the batch is computed."""

    task: str
    settings: Any
    results: dict  #: species → result (or SpeciesFailure) of the requests already computed
    workers: int = 1
    store: Any = None
    progress: Any = None
    force: bool = False
    #: species a step computed beyond the requests (shift products), kept for a second pass of the steps
    computed: dict = field(default_factory=dict)
    #: species of ``results`` a step recomputed from a lower structure it found (species → new result):
    #: the runner then finishes the records again from them
    lowered: dict = field(default_factory=dict)


def with_defaults(model: type[BaseModel], options: dict) -> dict:
    """``options`` over the defaults of ``model`` (what a prepare step reads)."""
    defaults = {k: f.default for k, f in model.model_fields.items() if not f.is_required()}
    return {**defaults, **options}


def keep(records: list[dict], settings: Settings) -> list[dict]:
    """Collate step of a task with one record per request: the records as they are."""
    return records


@dataclass(frozen=True)
class TaskSpec:
    """What a task declares; everything else (command line, workflow, report, runner) reads it."""

    name: str  #: command and workflow name
    help: str  #: one line, the command's help
    options: type[BaseModel]  #: the task's options (defaults and descriptions written once)
    headline: str | None  #: record key of the headline quantity (the summary and the ladder plot)
    view: tuple[Column, ...]  #: reading view: the short table of the terminal and the report
    wide: tuple[tuple[str, str], ...]  #: (key, header) of the terminal's --wide table
    title: str  #: terminal table title
    report_title: str  #: report heading, a question a chemist asks
    #: (text, name, settings, options, force) → prepared requests; None for a task that runs itself
    prepare: Callable[..., list] | None = None
    #: (items, settings, **options, workers, force, progress, store) → records, for a task that runs itself
    run: Callable[..., list[dict]] | None = None
    collate: Callable[[list[dict], Any], list[dict]] = keep  #: records of one input → ranked or chosen records
    #: (groups, settings, options, context) → groups: requests set aside before the full computation (the site
    #: funnel), None: every request is computed in full
    funnel: Callable[..., list] | None = None
    #: steps after collation, each (records, options, context) → records; they may raise Interrupted
    after: tuple[Callable[..., list[dict]], ...] = ()
    refine: Callable[..., list] | None = None  #: DFT refinement hook (refine_task_records), None: not refinable
    uncertainty: Callable[..., list[dict]] | None = None  #: error bars hook (uncertainty.annotate), None: none
    #: settings the species are computed at whatever the caller's (None: the caller's), e.g. a descriptor's level
    fixed_level: Callable[[Any], Any] | None = None
    one_pass_per: str | None = None  #: an option whose list of values runs one pass each (rate: medium)
    calibrated: bool = False  #: the command line offers --calibrated (HIA calibrated against experiment)
    level_options: bool = True  #: the command takes the level options (solvent, engine, temperature, …)
    #: the typed record of the task (a model of cationcalc.tasks.record_types; its failure model is derived);
    #: None: the shared keys are typed and the task's own keys pass as they are
    record: type[BaseModel] | None = None

    def defaults(self) -> dict:
        """Every option with a default, by name."""
        return {k: f.default for k, f in self.options.model_fields.items() if not f.is_required()}


_REGISTRY: dict[str, TaskSpec] = {}
_SEQUENCE: dict[str, int] = {}
_loaded = False


def register(task: TaskSpec) -> TaskSpec:
    """Add (or replace) a task; returns it, so a module can write ``HIA = register(TaskSpec(...))``."""
    _REGISTRY[task.name] = task
    _SEQUENCE.setdefault(task.name, len(_SEQUENCE))
    return task


def unregister(name: str) -> None:
    """Remove a task (a test's throwaway spec)."""
    _REGISTRY.pop(name, None)
    _SEQUENCE.pop(name, None)


def _load() -> None:
    """Import the modules that declare tasks: the built-in ones in order, then any other module of this
    package (a new task module registers itself without being listed anywhere)."""
    global _loaded
    if not _loaded:
        _loaded = True
        package = __name__.rsplit(".", 1)[0]
        others = sorted(f"{package}.{m.name}" for m in pkgutil.iter_modules(importlib.import_module(package).__path__))
        for module in (*TASK_MODULES, *(m for m in others if m not in TASK_MODULES)):
            importlib.import_module(module)


def _position(task: TaskSpec) -> tuple[int, int]:
    code = task.prepare or task.run
    module = getattr(code, "__module__", "")
    rank = TASK_MODULES.index(module) if module in TASK_MODULES else len(TASK_MODULES)
    return rank, _SEQUENCE[task.name]


def specs() -> list[TaskSpec]:
    """Every registered task: the built-in ones in :data:`TASK_MODULES` order, then any added later."""
    _load()
    return sorted(_REGISTRY.values(), key=_position)


def task_names() -> list[str]:
    return [t.name for t in specs()]


class TaskNames(Sequence):
    """The names of the registered tasks (those ``keep`` accepts), read afresh on every use."""

    def __init__(self, keep: Callable[[TaskSpec], bool] | None = None):
        self._keep = keep

    def _names(self) -> list[str]:
        return [t.name for t in specs() if self._keep is None or self._keep(t)]

    def __getitem__(self, index):
        return self._names()[index]

    def __len__(self) -> int:
        return len(self._names())

    def __repr__(self) -> str:
        return repr(tuple(self._names()))


class SpecField(Mapping):
    """Task name → one attribute of its spec (``view``, ``wide``, ``report_title``), read afresh on every use."""

    def __init__(self, attribute: str):
        self._attribute = attribute

    def __getitem__(self, name: str):
        _load()
        if name not in _REGISTRY:
            raise KeyError(name)
        return getattr(_REGISTRY[name], self._attribute)

    def __iter__(self):
        return iter(task_names())

    def __len__(self) -> int:
        return len(task_names())


def spec(name: str) -> TaskSpec:
    """The spec of task ``name``; ValueError naming the tasks for an unknown one."""
    _load()
    if name not in _REGISTRY:
        raise ValueError(f"unknown task {name!r}: choose one of {', '.join(task_names())}")
    return _REGISTRY[name]


def cli_meta(field: FieldInfo) -> dict:
    """The command-line hints of an options field (see :func:`option`)."""
    extra = field.json_schema_extra if isinstance(field.json_schema_extra, dict) else {}
    return extra.get("cli") or {"flag": None, "cli_help": None, "comma_list": False, "metavar": None}


__all__ = ["TaskSpec", "TaskOptions", "StepContext", "RefinableOptions", "option", "register", "unregister", "specs",
           "task_names", "TaskNames", "SpecField", "spec", "keep", "with_defaults", "cli_meta", "REFINE_OPTIONS", "TASK_MODULES"]
