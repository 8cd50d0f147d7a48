"""Studies: a YAML workflow file → a plan → computed records → files in one folder (the public entry points).

The work is in four modules: :mod:`~cationcalc.studies.schema` (the models),
:mod:`~cationcalc.studies.loading` (YAML and ``FILE:LINE`` errors),
:mod:`~cationcalc.studies.species_files`, :mod:`~cationcalc.studies.plan`
(species × tasks × solvents, paths, the dry-run text) and
:mod:`~cationcalc.studies.runner` (compute, run the tasks, write).

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

from cationcalc.studies.loading import LoadedWorkflow, load_workflow
from cationcalc.studies.plan import (ALLOW_OUTSIDE, Plan, PlannedTask, build_plan, confined_path, describe_plan,
                                     known_needs, planned_needs, planned_species_count, task_in_solvent)
from cationcalc.studies.runner import Outcome, check_writable, run_plan, run_study
from cationcalc.studies.schema import KNOWN_TASKS, OUTPUT_FORMATS, Workflow, WorkflowError, workflow_model
from cationcalc.studies.species_files import SPECIES_SUFFIXES, read_species_file

__all__ = ["Workflow", "WorkflowError", "load_workflow", "build_plan", "describe_plan", "run_plan", "run_study",
           "KNOWN_TASKS", "LoadedWorkflow", "Plan", "PlannedTask", "Outcome", "check_writable", "confined_path",
           "known_needs", "planned_needs", "planned_species_count", "task_in_solvent", "workflow_model",
           "read_species_file", "ALLOW_OUTSIDE", "OUTPUT_FORMATS", "SPECIES_SUFFIXES"]
