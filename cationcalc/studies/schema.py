"""The workflow schema: pydantic models of a study file, strict (unknown keys are refused, with the closest).

The task options are not written here: ``tasks`` holds, for every task in
the registry (:mod:`cationcalc.tasks.registry`), that task's own options model,
so a task's defaults are written once, in its module.  :func:`workflow_model`
builds the schema for the tasks registered now.

Example
-------
>>> from cationcalc.studies.schema import KNOWN_TASKS, workflow_model
>>> wf = workflow_model().model_validate({"study": "s", "species": ["C[C+](C)C"], "tasks": ["hia", "shifts"]})
>>> [name for name, _ in wf.tasks.selected()], wf.tasks.shifts.depth, wf.optimizer.algorithm
(['hia', 'shifts'], 3, 'LBFGS')
>>> "rate" in KNOWN_TASKS
True
"""

from __future__ import annotations

import copy
import difflib
import re
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, create_model, field_validator, model_validator

from cationcalc.chem import species as _species  # noqa: F401  (imported for its side effect: RDKit's parser stays quiet)
from cationcalc.chem.conformers import ConformerSettings
from cationcalc.compute.models import PressurePa, Settings, TemperatureK
from cationcalc.engines.solvents import check_gbsa_solvent, normalise_solvent
from cationcalc.tasks.registry import REFINE_OPTIONS, TaskNames, specs

#: every task a workflow may name (the registry's); which of them this installation can run is checked at plan time
KNOWN_TASKS = TaskNames()
OUTPUT_FORMATS = ("csv", "json", "sdf", "xyz", "html")


class WorkflowError(ValueError):
    """A workflow file that cannot be run: one line naming the file, the line, the key and the fix."""


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class MethodSpec(_Strict):
    engine: Literal["tblite", "xtb"] = Field("tblite", description="GFN2-xTB implementation")
    method: Literal["GFN2-xTB"] = Field("GFN2-xTB", description="GFN level")
    solvent: list[str | None] = Field(default_factory=lambda: [None],
                                      description="one implicit solvent or a list; none = gas phase")
    temperature_k: TemperatureK = Field(298.15, description="K, 50-3000 (models.TEMPERATURE_RANGE_K)")
    pressure_pa: PressurePa = Field(101325.0, description="Pa, 1-1e7 (models.PRESSURE_RANGE_PA)")
    qrrho: bool = True
    enantiomer_mixing: bool = False
    scf_max_iterations: int = Field(250, ge=1)
    hessian_conformers: Literal["all", "lowest", "none"] = Field(
        "lowest", description=Settings.model_fields["hessian_conformers"].description)

    @field_validator("solvent", mode="before")
    @classmethod
    def _listify(cls, value):
        if value is None or isinstance(value, str):
            return [value]
        return value

    @field_validator("solvent")
    @classmethod
    def _known(cls, value: list):
        if not value:
            raise ValueError("give at least one solvent (none for the gas phase)")
        out: list[str | None] = []
        for name in value:
            canonical = normalise_solvent(name)
            if canonical not in out:
                out.append(canonical)
        return out

    @model_validator(mode="after")
    def _engine_knows_solvents(self):
        for solvent in self.solvent:
            check_gbsa_solvent(self.engine, solvent)  # the same check and words as the command line
        return self


def _as_in_settings(name: str):
    """The field as :class:`~cationcalc.compute.models.Settings` declares it (default, bounds, choices)."""
    return copy.deepcopy(Settings.model_fields[name])


#: the optimisers Settings offers
OptimizerName = Settings.model_fields["optimizer"].annotation


class OptimizerSpec(_Strict):
    algorithm: OptimizerName = _as_in_settings("optimizer")
    fmax_ev_per_angstrom: float = _as_in_settings("fmax_ev_per_angstrom")
    max_steps: int = _as_in_settings("max_steps")


class SpeciesEntry(_Strict):
    smiles: str | None = None
    name: str = ""
    file: str | None = None
    format: Literal["auto", "smi", "csv", "sdf"] = "auto"
    tasks: list[str] | None = Field(None, description="only these tasks run on this entry")

    @model_validator(mode="before")
    @classmethod
    def _bare(cls, value):
        if isinstance(value, str):
            return {"smiles": value}
        return value

    @model_validator(mode="after")
    def _one_source(self):
        if (self.smiles is None) == (self.file is None):
            raise ValueError("give either smiles or file in each species entry")
        if self.file is not None and self.name:
            raise ValueError("name belongs to an inline species; a file gives its own names")
        if self.tasks is not None:
            for t in self.tasks:
                if t not in KNOWN_TASKS:
                    close = difflib.get_close_matches(t, KNOWN_TASKS, n=1)
                    raise ValueError(f"unknown task {t!r}" + (f"; did you mean {close[0]!r}?" if close else
                                                               f"; choose from {', '.join(KNOWN_TASKS)}"))
        return self


class _TaskSetBase(_Strict):
    """The tasks of a study: one optional field per registered task, holding that task's options model."""

    @model_validator(mode="after")
    def _some(self):
        if not self.selected():
            raise ValueError(f"name at least one task: {', '.join(KNOWN_TASKS)}")
        return self

    def selected(self) -> list[tuple[str, BaseModel]]:
        return [(name, getattr(self, name)) for name in type(self).model_fields if getattr(self, name) is not None]


class OutputSpec(_Strict):
    folder: str | None = Field(None, description="default cationcalc-output/<study>, relative to the workflow")
    store: str = Field("store.sqlite", description="result store, relative to the output folder")
    formats: list[Literal["csv", "json", "sdf", "xyz", "html"]] = Field(default_factory=lambda: list(OUTPUT_FORMATS))


class ExecutionSpec(_Strict):
    workers: int | None = Field(None, ge=1, description="auto (one per core) or a number")
    scheduler: str = Field("processes", description="processes, dask-local or a Dask address tcp://host:8786")
    force: bool = Field(False, description="compute species above the size limit")

    @field_validator("workers", mode="before")
    @classmethod
    def _auto(cls, value):
        return None if value == "auto" else value

    @field_validator("scheduler")
    @classmethod
    def _scheduler(cls, value: str):
        if value in ("processes", "dask-local") or re.match(r"^[a-z][a-z0-9+]*://\S+$", value):
            return value
        raise ValueError("use processes, dask-local or a Dask scheduler address such as tcp://host:8786")


class Workflow(_Strict):
    study: str = Field(description="study name (letters, digits, . _ -)")
    description: str = ""
    method: MethodSpec = MethodSpec()
    optimizer: OptimizerSpec = OptimizerSpec()
    conformers: ConformerSettings = ConformerSettings()
    species: list[SpeciesEntry] = Field(min_length=1)
    tasks: Any = Field(description="the tasks to run (see workflow_model: one options model per registered task)")
    output: OutputSpec = OutputSpec()
    execution: ExecutionSpec = ExecutionSpec()

    @field_validator("study")
    @classmethod
    def _name(cls, value: str):
        if not re.match(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,99}$", value):
            raise ValueError("use letters, digits, '.', '_' and '-' (it names the output folder)")
        return value

    @field_validator("species", mode="before")
    @classmethod
    def _one_entry(cls, value):
        return [value] if isinstance(value, dict) else value

    @field_validator("tasks", mode="before")
    @classmethod
    def _task_list(cls, value):
        if isinstance(value, str):
            value = [value]
        if isinstance(value, list):
            merged: dict = {}
            for item in value:
                if isinstance(item, str):
                    merged[item] = {}
                elif isinstance(item, dict):
                    merged.update(item)
                else:
                    raise ValueError("each task is a name (hia) or a mapping name: {options}")
            value = merged
        if isinstance(value, dict):
            return {k: ({} if v is None else v) for k, v in value.items()}
        return value

    def settings_for(self, solvent: str | None) -> Settings:
        m, o = self.method, self.optimizer
        return Settings(engine=m.engine, method=m.method, solvent=solvent, temperature_k=m.temperature_k,
                        pressure_pa=m.pressure_pa, qrrho=m.qrrho, enantiomer_mixing=m.enantiomer_mixing,
                        scf_max_iterations=m.scf_max_iterations, optimizer=o.algorithm,
                        hessian_conformers=m.hessian_conformers,
                        fmax_ev_per_angstrom=o.fmax_ev_per_angstrom, max_steps=o.max_steps,
                        conformers=self.conformers)


_MODELS: dict[tuple, type[Workflow]] = {}


def workflow_model() -> type[Workflow]:
    """The workflow schema for the tasks registered now: ``tasks`` holds one options model per task."""
    registered = tuple((t.name, t.options) for t in specs())
    if registered not in _MODELS:
        task_set = create_model("TaskSet", __base__=_TaskSetBase,
                                **{name: (options | None, None) for name, options in registered})
        _MODELS[registered] = create_model("Workflow", __base__=Workflow, tasks=(task_set, ...))
    return _MODELS[registered]



__all__ = ["Workflow", "WorkflowError", "MethodSpec", "OptimizerSpec", "SpeciesEntry", "OutputSpec", "ExecutionSpec",
           "workflow_model", "KNOWN_TASKS", "OUTPUT_FORMATS", "REFINE_OPTIONS"]
