"""Studies: a YAML workflow file → a plan → computed records → files in one folder.

A workflow file names a study, the method (engine, GFN level, one solvent or
a list of them, temperature), conformer and optimiser settings, the species
(inline, or a ``.smi``/``.csv``/``.sdf`` file relative to the workflow file),
the tasks to run on every species (with per-task options), where the outputs
go and how to execute.  ``cationcalc run STUDY.yaml`` validates it, expands
the plan (species × tasks × solvents), computes every distinct molecular
species once through the result store (:mod:`cationcalc.execution.store`), runs the
tasks and writes the outputs (:mod:`cationcalc.report.outputs`).  A second run of an
unchanged study reads everything from the store and rewrites identical files.

Schema (every key optional except ``study``, ``species`` and ``tasks``)::

    study: my-screen                # name: letters, digits, . _ -
    description: free text
    method:     {engine: tblite, method: GFN2-xTB, solvent: [none, water],
                 temperature_k: 298.15, pressure_pa: 101325, qrrho: true,
                 enantiomer_mixing: false, scf_max_iterations: 250}
    optimizer:  {algorithm: LBFGS, fmax_ev_per_angstrom: 0.01, max_steps: 500}
    conformers: {max_conformers: 30, base: 4, per_rotor: 4, n_optimize: 3, ...}
    species:                        # a list; each item one of
      - "C[C+](C)C"                 #   a bare SMILES
      - {smiles: "CC(C)(C)Cl", name: tert-butyl chloride, tasks: [heterolysis]}
      - {file: cations.smi}         #   a file (.smi/.txt, .csv with smiles,name, .sdf)
    tasks:                          # names, or a mapping name → options
      - hia: {reference: tert-butyl}
      - heterolysis
    output:     {folder: cationcalc-output/my-screen, store: store.sqlite,
                 formats: [csv, json, sdf, xyz, html]}
    execution:  {workers: auto, scheduler: processes, force: false}

``scheduler`` is ``processes`` (local pool), ``dask-local`` (a local Dask
cluster) or the address of a Dask scheduler (``tcp://host:8786``).  Paths are
relative to the workflow file; ``store`` is relative to the output folder.
Species files, the output folder and the store must lie inside the workflow
file's folder (``cationcalc run --allow-outside-paths`` lifts this; /proc,
/sys and /dev are never read); species files are regular ``.smi``/``.txt``,
``.csv`` or ``.sdf`` files.  YAML aliases (``*name``) are refused.
``temperature_k`` is 50-3000 K and ``pressure_pa`` 1-1e7 Pa.
A species entry's ``tasks`` restricts which tasks run on it.  Mistakes are
reported as ``FILE:LINE: ...`` naming the key, with the closest valid key.

Example
-------
>>> import os, tempfile
>>> from cationcalc.studies.workflow import load_workflow, build_plan
>>> path = os.path.join(tempfile.mkdtemp(), "tiny.yaml")
>>> _ = open(path, "w").write("study: tiny\\nspecies: ['C[C+](C)C']\\ntasks: [hia, thermo]\\n"
...                           "method: {solvent: [none, water]}\\n")
>>> plan = build_plan(load_workflow(path))
>>> plan.row_count, [s or "gas" for s in plan.solvents]
(4, ['gas', 'water'])
"""

from __future__ import annotations

import csv
import dataclasses
import difflib
import hashlib
import importlib
import inspect
import io
import os
import re
import time
import typing
from pathlib import Path
from typing import Any, Literal

import yaml
from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator, model_validator

from cationcalc.about import __version__
from cationcalc.chem import species as _species  # noqa: F401  (imported for its side effect: RDKit's parser stays quiet)
from cationcalc.chem.conformers import ConformerSettings
from cationcalc.engines.solvents import normalise_solvent
from cationcalc.compute.models import PressurePa, Settings, TemperatureK, species_key

#: every task a workflow may name; which of them this installation can run is checked at plan time
KNOWN_TASKS = ("hia", "heterolysis", "thermo", "ionize", "sites", "ladder", "shifts", "rate")
OUTPUT_FORMATS = ("csv", "json", "sdf", "xyz", "html")


class WorkflowError(ValueError):
    """A workflow file that cannot be run: one line naming the file, the line, the key and the fix."""


# ---------------------------------------------------------------------------------------------
# schema
# ---------------------------------------------------------------------------------------------

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


class OptimizerSpec(_Strict):
    algorithm: Literal["LBFGS", "BFGS", "FIRE"] = "LBFGS"
    fmax_ev_per_angstrom: float = Field(0.01, gt=0)
    max_steps: int = Field(500, ge=1)


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


class _Refinable(_Strict):
    """DFT refinement of a task's species (cationcalc.execution.refine): a level, optionally only the best of a ranking."""

    refine: str | None = Field(None, description="DFT level, e.g. wB97X-D3BJ/def2-TZVP (true: the default level)")
    refine_top_k: int | None = Field(None, ge=1, description="refine only the k best requests of the ranking")
    refine_window_kcal_mol: float | None = Field(None, ge=0, description="refine only those within this of the best")

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
        if self.refine is None and (self.refine_top_k is not None or self.refine_window_kcal_mol is not None):
            raise ValueError("refine_top_k and refine_window_kcal_mol need refine: LEVEL")
        return self


REFINE_OPTIONS = ("refine", "refine_top_k", "refine_window_kcal_mol")


class HiaOptions(_Refinable):
    reference: str = Field("tert-butyl", description="anchor cation of the hydride exchange")

    @field_validator("reference")
    @classmethod
    def _known_reference(cls, value):
        from cationcalc.chem.reference import hia_reference

        hia_reference(value)  # raises ValueError naming the known anchors
        return value


class NoOptions(_Strict):
    pass


class RefineOptions(_Refinable):
    pass


def _known_medium(value):
    if value is None:
        return None
    from cationcalc.chem.media import medium

    return medium(str(value)).code  # InputError (a ValueError) lists the known media


class IonizeOptions(_Refinable):
    leaving_group: str = Field("auto", description="leaving group name, or auto")
    acid: bool = Field(False, description="protonate alcohol and ether oxygens (R–OH → R–OH2+)")
    reference_substrate: str | None = Field(None, description="SMILES that ΔΔG_ion is measured against")
    shifts: bool = Field(True, description="screen the cation formed for downhill 1,2-shifts")
    medium: str | None = Field(None, description="solvolysis medium (80E20W, '80% ethanol', …): adds k and half-life")

    _medium = field_validator("medium")(classmethod(lambda cls, v: _known_medium(v)))


class SitesOptions(_Refinable):
    acid: bool = Field(False, description="protonate alcohol and ether oxygens first")
    hydride: bool = Field(False, description="scan C–H bonds by hydride abstraction")
    shifts: bool = Field(True, description="screen each cation formed for downhill 1,2-shifts")


class LadderOptions(_Refinable):
    groups: list[str] | None = Field(None, description="only these leaving groups")
    medium: str | None = Field(None, description="solvolysis medium: half-life per leaving group with a published N_f")

    _medium = field_validator("medium")(classmethod(lambda cls, v: _known_medium(v)))


class RateOptions(_Strict):
    medium: list[str] = Field(..., min_length=1, description="solvolysis media (80E20W, '97% TFE (w/w)', water, …)")
    temperature_k: float = Field(298.15, description="temperature of k and the half-life, K (273.15–423.15)")
    leaving_group: str = Field("auto", description="leaving group name, or auto")

    @field_validator("medium", mode="before")
    @classmethod
    def _media(cls, value):
        values = [value] if isinstance(value, str) else list(value or [])
        return [_known_medium(v) for v in values]

    @field_validator("temperature_k")
    @classmethod
    def _temperature(cls, value):
        from cationcalc.tasks.rate import check_temperature

        return check_temperature(value)


class ShiftsOptions(_Strict):
    depth: int = Field(3, ge=1)
    threshold_kcal_mol: float = 1.0
    ceiling_kcal_mol: float = 25.0
    barriers: bool = False


class TaskSet(_Strict):
    hia: HiaOptions | None = None
    heterolysis: RefineOptions | None = None
    thermo: RefineOptions | None = None
    ionize: IonizeOptions | None = None
    sites: SitesOptions | None = None
    ladder: LadderOptions | None = None
    shifts: ShiftsOptions | None = None
    rate: RateOptions | None = None

    @model_validator(mode="after")
    def _some(self):
        if not self.selected():
            raise ValueError(f"name at least one task: {', '.join(KNOWN_TASKS)}")
        return self

    def selected(self) -> list[tuple[str, BaseModel]]:
        return [(name, getattr(self, name)) for name in KNOWN_TASKS if getattr(self, name) is not None]


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
    tasks: TaskSet
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
                        fmax_ev_per_angstrom=o.fmax_ev_per_angstrom, max_steps=o.max_steps,
                        conformers=self.conformers)


# ---------------------------------------------------------------------------------------------
# loading, with errors that point at the line
# ---------------------------------------------------------------------------------------------

@dataclasses.dataclass
class LoadedWorkflow:
    """A validated workflow and where it came from."""

    path: Path
    text: str
    sha256: str
    workflow: Workflow
    node: Any  # the composed YAML node tree (for line numbers)

    def line_of(self, loc: tuple) -> int:
        return _line_of(self.node, loc)


def _mapping_entry(node, part) -> tuple[int, Any] | None:
    """(1-based line of the key, value node) of key ``part`` in a YAML mapping node, or None."""
    for key, value in node.value:
        if isinstance(key, yaml.ScalarNode) and key.value == str(part):
            return key.start_mark.line + 1, value
    return None


def _line_of(node, loc: tuple) -> int:
    """1-based line of the YAML node at a pydantic location (the deepest part that exists)."""
    line = node.start_mark.line + 1 if node is not None else 1
    for part in loc:
        if isinstance(node, yaml.MappingNode):
            if isinstance(part, int):
                continue  # a single mapping written where a list was expected
            found = _mapping_entry(node, part)
            if found is None:
                return line
            line, node = found
        elif isinstance(node, yaml.SequenceNode):
            if isinstance(part, int):
                if part >= len(node.value):
                    return line
                node = node.value[part]
                line = node.start_mark.line + 1
                continue
            for item in node.value:  # a task list written as names: [hia, heterolysis]
                if isinstance(item, yaml.ScalarNode) and item.value == str(part):
                    return item.start_mark.line + 1
                found = _mapping_entry(item, part) if isinstance(item, yaml.MappingNode) else None
                if found is not None:
                    line, node = found
                    break
            else:
                return line
        else:
            return line
    return line


def _model_in(annotation):
    if inspect.isclass(annotation) and issubclass(annotation, BaseModel):
        return annotation
    for arg in typing.get_args(annotation):
        found = _model_in(arg)
        if found is not None:
            return found
    return None


def _model_at(loc: tuple):
    model = Workflow
    for part in loc:
        if isinstance(part, int):
            continue
        field = model.model_fields.get(str(part))
        if field is None:
            return None
        model = _model_in(field.annotation)
        if model is None:
            return None
    return model


def _describe(loc: tuple) -> str:
    text = ""
    for part in loc:
        text += f"[{part}]" if isinstance(part, int) else (f".{part}" if text else str(part))
    return text or "the top level"


def _format_validation_error(path: Path, node, exc: ValidationError) -> str:
    # a misspelt key also makes the key it should have been "missing": report the misspelling
    rank = {"extra_forbidden": 0, "missing": 2}
    errors = sorted(exc.errors(include_url=False), key=lambda e: rank.get(e["type"], 1))
    first = errors[0]
    loc = tuple(p for p in first["loc"] if isinstance(p, (str, int)))
    line = _line_of(node, loc)
    kind = first["type"]
    message = str(first["msg"]).removeprefix("Value error, ")
    where = f"{path}:{line}"
    more = f" (and {len(errors) - 1} more problem{'s' if len(errors) > 2 else ''})" if len(errors) > 1 else ""
    if kind == "extra_forbidden":
        key = str(loc[-1])
        parent = loc[:-1]
        model = _model_at(parent)
        valid = list(model.model_fields) if model is not None else []
        close = difflib.get_close_matches(key, valid, n=1, cutoff=0.5)
        hint = f"did you mean {close[0]!r}?" if close else f"valid keys: {', '.join(valid)}"
        section = f"in {_describe(parent)}" if parent else "at the top level"
        return f"{where}: unknown key {key!r} {section}; {hint}{more}"
    if kind == "missing":
        section = f"in {_describe(loc[:-1])}" if loc[:-1] else "at the top level"
        return f"{where}: missing key {loc[-1]!r} {section}; add it{more}"
    got = first.get("input")
    got_text = "" if isinstance(got, (dict, list)) or got is None else f" (got {got!r})"
    return f"{where}: key {_describe(loc)!r}: {message}{got_text}{more}"


def _duplicate_key(node) -> tuple[str, int] | None:
    if isinstance(node, yaml.MappingNode):
        seen = set()
        for key, value in node.value:
            if isinstance(key, yaml.ScalarNode):
                if key.value in seen:
                    return key.value, key.start_mark.line + 1
                seen.add(key.value)
            found = _duplicate_key(value)
            if found:
                return found
    elif isinstance(node, yaml.SequenceNode):
        for item in node.value:
            found = _duplicate_key(item)
            if found:
                return found
    return None


def _refuse_aliases(path: Path, text: str) -> None:
    """Refuse YAML aliases (``*name``) before anything builds a tree from them.

    An alias repeats a whole subtree: nested ones expand exponentially ("billion laughs") and an
    alias inside its own anchor is an endless structure.  A study file never needs them; the
    event stream shows them without expanding anything.
    """
    for event in yaml.parse(text, Loader=yaml.SafeLoader):
        if isinstance(event, yaml.AliasEvent):
            line = event.start_mark.line + 1 if event.start_mark is not None else 1
            raise WorkflowError(f"{path}:{line}: YAML alias *{event.anchor} is not accepted in a study file; "
                                "write the value out where it is needed")


def load_workflow(path: str | os.PathLike) -> LoadedWorkflow:
    """Read and validate a workflow file; raises WorkflowError (FILE:LINE: ...)."""
    path = Path(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise WorkflowError(f"cannot read workflow file {str(path)!r}: {exc.strerror}; give the path of a "
                            ".yaml study file") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise WorkflowError(f"{path}: not UTF-8 text (byte {exc.start}); save it as UTF-8") from None
    try:
        _refuse_aliases(path, text)
        node = yaml.compose(text)
        data = yaml.safe_load(text)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        line = mark.line + 1 if mark is not None else 1
        problem = getattr(exc, "problem", None) or str(exc).splitlines()[0]
        raise WorkflowError(f"{path}:{line}: YAML syntax: {problem}; check the indentation and quoting") from None
    if not isinstance(data, dict):
        raise WorkflowError(f"{path}:1: a workflow is a YAML mapping (study:, species:, tasks: ...); "
                            "see workflows/ for examples")
    duplicate = _duplicate_key(node)
    if duplicate:
        raise WorkflowError(f"{path}:{duplicate[1]}: key {duplicate[0]!r} appears twice in one mapping; keep one")
    try:
        workflow = Workflow.model_validate(data)
    except ValidationError as exc:
        raise WorkflowError(_format_validation_error(path, node, exc)) from None
    return LoadedWorkflow(path=path, text=text, sha256=hashlib.sha256(raw).hexdigest(), workflow=workflow,
                          node=node)


# ---------------------------------------------------------------------------------------------
# species files
# ---------------------------------------------------------------------------------------------

def _read_text(path: Path, where: str) -> str:
    try:
        return path.read_bytes().decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise WorkflowError(f"{where}: species file {str(path)!r} is not UTF-8 text (byte {exc.start}); "
                            "save it as UTF-8") from None


def read_species_file(path: Path, fmt: str, where: str) -> list[tuple[str, str]]:
    """(SMILES, name) pairs from a .smi/.txt, .csv or .sdf file."""
    if fmt == "auto":
        suffix = path.suffix.lower()
        fmt = {".csv": "csv", ".sdf": "sdf", ".sd": "sdf", ".mol": "sdf"}.get(suffix, "smi")
    items: list[tuple[str, str]] = []
    if fmt == "smi":
        for line in _read_text(path, where).splitlines():
            stripped = line.strip()
            if not stripped or stripped.startswith("#"):
                continue
            parts = stripped.split(None, 1)
            items.append((parts[0], parts[1].strip() if len(parts) > 1 else ""))
    elif fmt == "csv":
        reader = csv.DictReader(io.StringIO(_read_text(path, where)))
        columns = {c.strip().lower(): c for c in (reader.fieldnames or [])}
        if "smiles" not in columns:
            raise WorkflowError(f"{where}: species file {str(path)!r} has no 'smiles' column (columns: "
                                f"{', '.join(reader.fieldnames or []) or 'none'}); add a header row smiles,name")
        for row in reader:
            smiles = (row.get(columns["smiles"]) or "").strip()
            if not smiles or smiles.startswith("#"):
                continue
            name = (row.get(columns["name"]) or "").strip() if "name" in columns else ""
            items.append((smiles, name))
    else:
        from rdkit import Chem

        if not _read_text(path, where).strip():
            raise WorkflowError(f"{where}: SDF file {str(path)!r} is empty (no record 1); add at least one "
                                "molecule record ending in $$$$")
        supplier = Chem.SDMolSupplier(str(path), removeHs=False, sanitize=True)
        for index, mol in enumerate(supplier):
            if mol is None:
                raise WorkflowError(f"{where}: record {index + 1} of SDF file {str(path)!r} cannot be read "
                                    "(empty or not a molecule block); fix or remove it")
            name = mol.GetProp("_Name").strip() if mol.HasProp("_Name") else ""
            items.append((Chem.MolToSmiles(Chem.RemoveHs(mol)), name))
    if not items:
        raise WorkflowError(f"{where}: species file {str(path)!r} lists no species; add one SMILES per line")
    return items


# ---------------------------------------------------------------------------------------------
# the plan
# ---------------------------------------------------------------------------------------------

@dataclasses.dataclass
class PlannedTask:
    name: str
    options: dict  # the keyword options passed to the task's code
    runner: Any
    items: list[tuple[str, str]]


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
        """Rows before tasks that give several records per input (species × tasks × solvents; the rate task:
        species × media, once whatever the solvents)."""
        return sum(len(t.items) * (len(t.options["medium"]) if t.name == "rate" else len(self.solvents))
                   for t in self.tasks)


def _runner_for(name: str):
    """The callable that runs task ``name`` in this installation, or None."""
    if name == "shifts":
        try:
            module = importlib.import_module(".shifts", __package__)
        except ImportError:
            return None
        return getattr(module, "run_shifts", None)
    from cationcalc.tasks import runner as tasks

    return tasks.run_task if name in getattr(tasks, "TASKS", ()) else None


def _task_options(name: str, options: BaseModel, runner) -> dict:
    if name == "hia":
        out = {"reference": options.reference}
    elif name == "shifts":
        return {"depth": options.depth, "threshold_kcal_mol": options.threshold_kcal_mol,
                "ceiling_kcal_mol": options.ceiling_kcal_mol, "barriers": options.barriers}
    else:
        out = options.model_dump()
    for key in REFINE_OPTIONS:  # DFT refinement options only when set
        out.pop(key, None)
        if getattr(options, key, None) is not None:
            out[key] = getattr(options, key)
    return out


def _accepts(runner, option: str) -> bool:
    params = inspect.signature(runner).parameters
    return option in params or any(p.kind is p.VAR_KEYWORD for p in params.values())


#: file name endings read as species files (format: auto)
SPECIES_SUFFIXES = {".smi": "smi", ".txt": "smi", ".csv": "csv", ".sdf": "sdf", ".sd": "sdf", ".mol": "sdf"}
#: never read from or written to, whatever a workflow says (kernel and device files)
_SYSTEM_FOLDERS = (Path("/proc"), Path("/sys"), Path("/dev"))
ALLOW_OUTSIDE = "--allow-outside-paths"


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


def build_plan(loaded: LoadedWorkflow, *, output: str | None = None, workers: int | None = None,
               scheduler: str | None = None, allow_outside: bool = False) -> Plan:
    """Resolve files, tasks and settings; raises WorkflowError (FILE:LINE: ...).

    Species files, the output folder and the store must resolve inside the workflow file's
    folder (the store may also sit in the output folder; ``output`` given here, and the store
    relative to it, are the user's own choice and are not confined) unless ``allow_outside``;
    species files must be regular files.  /proc, /sys and /dev are always refused.
    """
    import stat

    from cationcalc.execution.executors import default_workers

    wf, path = loaded.workflow, loaded.path
    base = path.resolve().parent
    items: list[tuple[str, str]] = []
    restrictions: list[list[str] | None] = []
    input_files: dict[str, str] = {}
    sources: dict[str, int] = {}
    for index, entry in enumerate(wf.species):
        if entry.file is None:
            items.append((entry.smiles, entry.name))
            restrictions.append(entry.tasks)
            sources["inline"] = sources.get("inline", 0) + 1
            continue
        where = f"{path}:{loaded.line_of(('species', index, 'file'))}"
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
        input_files[entry.file] = hashlib.sha256(file_path.read_bytes()).hexdigest()
        found = read_species_file(file_path, entry.format, where)
        sources[entry.file] = sources.get(entry.file, 0) + len(found)
        for item in found:
            items.append(item)
            restrictions.append(entry.tasks)

    planned: list[PlannedTask] = []
    for name, options in wf.tasks.selected():
        where = f"{path}:{loaded.line_of(('tasks', name))}"
        runner = _runner_for(name)
        if runner is None:
            from cationcalc.tasks import runner as tasks

            available = [t for t in KNOWN_TASKS if _runner_for(t) is not None] or list(getattr(tasks, "TASKS", ()))
            raise WorkflowError(f"{where}: task {name!r} is not available in this cationcalc ({__version__}); "
                                f"remove it or use one of: {', '.join(available)}")
        kwargs = _task_options(name, options, runner)
        for option in kwargs:
            if not _accepts(runner, option):
                raise WorkflowError(f"{where}: task {name!r} takes no option {option!r} in this cationcalc "
                                    f"({__version__}); remove the option")
        task_items = [item for item, only in zip(items, restrictions) if only is None or name in only]
        planned.append(PlannedTask(name, kwargs, runner, task_items))
    for index, entry in enumerate(wf.species):
        for t in entry.tasks or []:
            if t not in [p.name for p in planned]:
                where = f"{path}:{loaded.line_of(('species', index, 'tasks'))}"
                raise WorkflowError(f"{where}: species entry {index} asks for task {t!r}, which the study's "
                                    "tasks: list does not run; add it there or remove it here")

    if scheduler is not None:
        try:
            ExecutionSpec(scheduler=scheduler)
        except ValidationError:
            raise WorkflowError(f"--scheduler {scheduler!r}: use processes, dask-local or a Dask scheduler "
                                "address such as tcp://host:8786") from None
    scheduler = scheduler or wf.execution.scheduler
    if scheduler != "processes":
        try:
            import distributed  # noqa: F401
        except ImportError:
            line = loaded.line_of(("execution", "scheduler"))
            raise WorkflowError(f"{path}:{line}: scheduler {scheduler!r} needs Dask: pip install "
                                "\"cationcalc[dask]\" (or use scheduler: processes)") from None
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
    return Plan(loaded=loaded, items=items, solvents=list(wf.method.solvent), tasks=planned,
                settings={s: wf.settings_for(s) for s in wf.method.solvent}, output_dir=output_dir,
                store_path=store_path, input_files=input_files, sources=sources,
                workers=workers or wf.execution.workers or default_workers(), scheduler=scheduler,
                force=wf.execution.force, formats=list(dict.fromkeys(wf.output.formats)))


def known_needs(task: PlannedTask, settings: Settings, force: bool):
    """Species the task needs and the inputs it rejects; None for the shift search (it decides as it goes)."""
    from cationcalc.tasks import runner as tasks

    if task.name == "shifts":  # the shift search decides its species as it goes
        return None
    options = {"reference": "tert-butyl", **task.options}
    groups = [tasks.prepare(task.name, t, n, settings, options, force) for t, n in task.items]
    needs = [sp for group in groups for p in group if p.error is None for sp in p.needs.values()]
    rejected = [(n or t, p.error) for (t, n), group in zip(task.items, groups) for p in group
                if p.error is not None]
    return list(dict.fromkeys(needs)), rejected


def task_in_solvent(task: PlannedTask, plan: Plan, solvent: str | None) -> tuple[PlannedTask, Settings] | None:
    """The task and the settings its species are computed at in this solvent of the plan; None where it does
    not run.  The rate task does not depend on the study's solvents: it runs once, at the E_f descriptor's
    level, and its species are the same for every medium."""
    if task.name != "rate":
        return task, plan.settings[solvent]
    if solvent != plan.solvents[0] or not task.items:
        return None
    from cationcalc.tasks.rate import descriptor_settings

    first = PlannedTask(task.name, {**task.options, "medium": task.options["medium"][0]}, task.runner, task.items)
    return first, descriptor_settings(plan.settings[solvent])


def _row_label(task_name: str, solvent: str | None) -> str:
    return "E_f level" if task_name == "rate" else _label(solvent)


def _label(solvent: str | None) -> str:
    return solvent or "gas"


def planned_species_count(plan: Plan) -> int:
    """How many distinct species the plan lists before running (what the dry run calls distinct species)."""
    keys: set = set()
    for _, _, settings, found in planned_needs(plan):
        if found is not None:
            keys |= {species_key(sp.smiles, sp.charge, sp.multiplicity, settings) for sp in found[0]}
    return len(keys)


def planned_needs(plan: Plan):
    """(solvent, task, settings, known_needs) for every task of the plan where it runs, in plan order."""
    for solvent in plan.solvents:
        for task in plan.tasks:
            placed = task_in_solvent(task, plan, solvent)
            if placed is not None:
                yield solvent, placed[0], placed[1], known_needs(placed[0], placed[1], plan.force)


def describe_plan(plan: Plan) -> str:
    """The expanded plan as text: species × tasks × solvents, with counts and what the store holds."""
    from cationcalc.execution.store import ResultStore

    wf = plan.workflow
    store = ResultStore(plan.store_path) if plan.store_path.exists() else None
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
    rated = [t for t in plan.tasks if t.name == "rate"]
    lines.append(f"  rows       {sum(len(t.items) for t in plan.tasks if t.name != 'rate')} species×task × "
                 f"{len(plan.solvents)} solvent{'s' if len(plan.solvents) > 1 else ''}"
                 + "".join(f" + {len(t.items)} rate × {len(t.options['medium'])} media" for t in rated)
                 + f" = {plan.row_count}")
    lines.append("")
    lines.append(f"  {'solvent':<16}{'task':<13}{'inputs':>7}{'rejected':>10}{'species':>9}{'stored':>8}")
    total_needed: set = set()
    unknown = False
    rejected_notes: list[str] = []
    for solvent, task, settings, found in planned_needs(plan):
        if found is None:
            unknown = True
            lines.append(f"  {_row_label(task.name, solvent):<16}{task.name:<13}{len(task.items):>7}{'?':>10}"
                         f"{'(task)':>9}{'':>8}")
            continue
        needs, rejected = found
        keys = {species_key(sp.smiles, sp.charge, sp.multiplicity, settings) for sp in needs}
        total_needed |= keys
        stored = store.count_present(keys) if store else 0
        lines.append(f"  {_row_label(task.name, solvent):<16}{task.name:<13}{len(task.items):>7}{len(rejected):>10}"
                     f"{len(keys):>9}{stored:>8}")
        for name, error in rejected:
            note = f"  rejected by {task.name}: {name}: {error}"
            if note not in rejected_notes:
                rejected_notes.append(note)
    stored_total = store.count_present(total_needed) if store else 0
    lines.append("")
    lines.append(f"  distinct species: {len(total_needed)}, {stored_total} already in the store, "
                 f"{len(total_needed) - stored_total} to compute"
                 + ("; tasks marked (task) find their own species at run time" if unknown else "")
                 + ("; 1,2-shift products of the cations formed are found during the run and come on top"
                    if any(t.name in ("ionize", "sites") and t.options.get("shifts", True) for t in plan.tasks)
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


# ---------------------------------------------------------------------------------------------
# running
# ---------------------------------------------------------------------------------------------

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
    import tempfile

    from cationcalc.report.outputs import finite

    try:
        handle, name = tempfile.mkstemp(prefix=f"cationcalc-{plan.workflow.study}-", suffix=".json")
        with os.fdopen(handle, "w", encoding="utf-8") as out:
            import json

            json.dump(finite(records), out, indent=1, ensure_ascii=False, allow_nan=False, default=str)
        return Path(name)
    except OSError:
        return None


def run_plan(plan: Plan, *, show_progress: bool = False, write: bool = True) -> Outcome:
    """Compute and write a study; returns an :class:`Outcome` (``interrupted`` after Ctrl-C, nothing written)."""
    from cationcalc.execution.executors import Interrupted, scheduler_context, sigint_guard, sigint_seen
    from cationcalc.execution.store import ResultStore
    from cationcalc.tasks.records import BatchInterrupted

    start = time.perf_counter()
    if write:
        check_writable(plan)
    store = ResultStore(plan.store_path)
    try:
        # 1. every species whose need is known, all solvents, through one pool per solvent
        prefetch: dict[str, tuple[Settings, list]] = {}  # species per settings (the rate task's at its level)
        for _, _, settings, found in planned_needs(plan):
            if found:
                wanted = prefetch.setdefault(settings.model_dump_json(), (settings, []))[1]
                wanted.extend(sp for sp in found[0] if sp not in wanted)
        prefetch_list = list(prefetch.values())
        missing = sum(1 for settings, sps in prefetch_list for sp in sps
                      if species_key(sp.smiles, sp.charge, sp.multiplicity, settings) not in store)
        bar = _Progress(missing, show_progress)
        records: list[dict] = []
        try:
            with sigint_guard(), scheduler_context(plan.scheduler, plan.workers):
                from cationcalc.execution.executors import compute_many

                for settings, wanted in prefetch_list:
                    if wanted:
                        compute_many(wanted, settings, workers=plan.workers, progress=bar.callback(settings),
                                     store=store)
                    if sigint_seen():
                        raise KeyboardInterrupt
                # 2. the tasks: species come from the store (or are computed by the task itself)
                for solvent in plan.solvents:
                    settings = plan.settings[solvent]
                    for task in plan.tasks:
                        if not task.items or (task.name == "rate" and solvent != plan.solvents[0]):
                            continue  # the rate task does not depend on the study's solvents: run once
                        common = dict(workers=plan.workers, force=plan.force, progress=bar.callback(settings),
                                      store=store)
                        if task.name == "shifts":
                            rows = task.runner(task.items, settings, **task.options, **common)
                        else:
                            rows = task.runner(task.name, task.items, settings, **task.options, **common)
                        if sigint_seen():  # a library swallowed Ctrl-C: the rows may be partial
                            raise KeyboardInterrupt
                        for row in rows:  # a new flat record: the task first, without the profile
                            records.append({"task": task.name, **{k: v for k, v in row.items() if k != "profile"}})
        except (Interrupted, BatchInterrupted, KeyboardInterrupt):
            bar.stop()
            return Outcome(records=[], files=[], computed=bar.done, failed=bar.failed,
                           reused=len(store.hit_keys - bar.keys), elapsed_s=time.perf_counter() - start,
                           interrupted=True)
        bar.stop()
        files: list[Path] = []
        problem = ""
        if store.write_error:
            problem = (f"the result store {plan.store_path} could not be written ({store.write_error}); species "
                       "computed after that are in the outputs only")
        if write:
            from cationcalc.report.outputs import write_outputs

            try:
                files = write_outputs(plan, records, store)
            except OSError as exc:  # disk full, folder removed or made read-only during the run
                kept = _rescue_records(plan, records)
                problem = "; ".join(filter(None, [problem, (
                    f"cannot write the outputs to {plan.output_dir} ({exc.strerror or exc}); "
                    + (f"the records are saved in {kept}; " if kept else "")
                    + f"the species are in {plan.store_path}: free or fix the folder and run the same command "
                    "again (nothing is recomputed), or give --output FOLDER")]))
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

__all__ = ["Workflow", "WorkflowError", "load_workflow", "build_plan", "describe_plan", "run_plan", "run_study",
           "KNOWN_TASKS"]
