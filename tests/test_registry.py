"""One declaration per task: the command line, the workflow schema and the report read the task registry."""

import json

import pytest

from cationcalc.cli.main import build_parser, main
from cationcalc.report.columns import VIEWS
from cationcalc.report.outputs import TASK_TITLES
from cationcalc.studies.schema import KNOWN_TASKS, workflow_model
from cationcalc.tasks.records import Prepared, record_base
from cationcalc.tasks.registry import (REFINE_OPTIONS, TaskOptions, TaskSpec, cli_meta, option, register, spec,
                                       specs, unregister)
from cationcalc.tasks.views import SUBSTRATE, Column


def _subcommands() -> dict:
    parser = build_parser()
    return parser._subparsers._group_actions[0].choices


def _required_arguments(task: TaskSpec) -> list[str]:
    """A value for every required option (the rate task's medium)."""
    out = []
    for name, field in task.options.model_fields.items():
        if field.is_required():
            out += [cli_meta(field)["flag"] or "--" + name.replace("_", "-"), "80E20W"]
    return out


def _cli_defaults(task: TaskSpec) -> dict:
    args = build_parser().parse_args([task.name, *_required_arguments(task)])
    return {name: getattr(args, name) for name, field in task.options.model_fields.items()
            if name not in REFINE_OPTIONS and not field.is_required()}


def _workflow_defaults(task: TaskSpec) -> dict:
    required = {name: ["80E20W"] for name, f in task.options.model_fields.items() if f.is_required()}
    wf = workflow_model().model_validate({"study": "s", "species": ["C"], "tasks": [{task.name: required}]})
    chosen = getattr(wf.tasks, task.name)
    return {name: getattr(chosen, name) for name, field in task.options.model_fields.items()
            if name not in REFINE_OPTIONS and not field.is_required()}


@pytest.mark.parametrize("task", specs(), ids=lambda t: t.name)
def test_every_task_is_a_command_and_a_workflow_task_with_the_same_defaults(task):
    assert task.name in _subcommands()
    assert task.name in KNOWN_TASKS
    declared = {name: f.default for name, f in task.options.model_fields.items()
                if name not in REFINE_OPTIONS and not f.is_required()}
    assert _cli_defaults(task) == declared
    assert _workflow_defaults(task) == declared
    assert VIEWS[task.name] == task.view and TASK_TITLES[task.name] == task.report_title


@pytest.mark.parametrize("task", specs(), ids=lambda t: t.name)
def test_every_task_is_available_to_a_study_plan(task, tmp_path):
    from cationcalc.studies.loading import load_workflow
    from cationcalc.studies.plan import build_plan

    required = "".join(f" {name}: [80E20W]," for name, f in task.options.model_fields.items() if f.is_required())
    path = tmp_path / "one.yaml"
    path.write_text(f"study: one\nspecies: ['C[C+](C)C']\ntasks:\n  - {task.name}: {{{required.rstrip(',')} }}\n")
    planned = build_plan(load_workflow(path)).tasks
    assert [t.name for t in planned] == [task.name]
    assert planned[0].runner is not None and planned[0].items == [("C[C+](C)C", "")]


def test_the_shift_defaults_and_the_anchor_are_written_once():
    shifts = spec("shifts").defaults()
    assert (shifts["depth"], shifts["threshold_kcal_mol"], shifts["ceiling_kcal_mol"]) == (3, 1.0, 25.0)
    from cationcalc.chem.reference import NEAREST_CLASS

    assert spec("hia").defaults()["reference"] == NEAREST_CLASS
    assert build_parser().parse_args(["shifts"]).depth == 3


def test_the_workflow_offers_every_optimiser_settings_offers():
    from typing import get_args

    from cationcalc.compute.models import Settings
    from cationcalc.studies.schema import OptimizerSpec

    offered = set(get_args(Settings.model_fields["optimizer"].annotation))
    assert "PreconLBFGS" in offered
    assert set(get_args(OptimizerSpec.model_fields["algorithm"].annotation)) == offered


def test_the_gbsa_solvent_check_is_the_same_on_the_command_line_and_in_a_workflow(tmp_path, capsys):
    from cationcalc.studies.loading import load_workflow
    from cationcalc.studies.schema import WorkflowError

    assert main(["thermo", "O", "--engine", "xtb", "--solvent", "ethanol"]) == 2
    cli_error = capsys.readouterr().err.strip().splitlines()[-1]
    if "xtb-python" in cli_error and "pip install" in cli_error:
        pytest.skip("xtb-python is not installed: the command line stops before the solvent check")
    path = tmp_path / "s.yaml"
    path.write_text("study: s\nspecies: ['O']\ntasks: [thermo]\nmethod: {engine: xtb, solvent: [none, ethanol]}\n")
    with pytest.raises(WorkflowError) as caught:
        load_workflow(path)
    message = cli_error.removeprefix("cationcalc: error: ")
    assert message in str(caught.value) and "GBSA" in message


class DemoOptions(TaskOptions):
    strength: float = option(2.5, "how strongly to demonstrate (default {default:g})")
    loud: bool = option(False, "demonstrate loudly")


def _prepare_demo(text, name, settings, options, force):
    return [Prepared(record_base(text, name, settings),
                     error=f"demo task: strength {options.get('strength', 2.5)}, nothing computed")]


@pytest.fixture
def demo_task():
    demo = register(TaskSpec(name="demo", help="a throwaway task of the registry test", options=DemoOptions,
                             headline=None, view=(SUBSTRATE, Column("strength", "strength")),
                             wide=(("name", "name"),), title="demo", report_title="a demonstration?",
                             prepare=_prepare_demo))
    try:
        yield demo
    finally:
        unregister("demo")


def test_a_registered_spec_is_enough_to_appear_on_the_command_line_and_in_a_workflow(demo_task, tmp_path, capsys):
    commands = _subcommands()
    assert "demo" in commands and "--strength" in commands["demo"].format_help()
    assert "how strongly to demonstrate (default 2.5)" in commands["demo"].format_help()
    assert _cli_defaults(demo_task) == _workflow_defaults(demo_task) == {"strength": 2.5, "loud": False}
    assert "demo" in KNOWN_TASKS and VIEWS["demo"] == demo_task.view and TASK_TITLES["demo"] == "a demonstration?"
    # the command runs it through the generic runner (the demo refuses every input: no computation)
    assert main(["demo", "C", "--strength", "4", "--json"]) == 1
    record = json.loads(capsys.readouterr().out)[0]
    assert record["error"] == "demo task: strength 4.0, nothing computed"
    # and a workflow names it, with its options checked by its own model
    from cationcalc.studies.loading import load_workflow
    from cationcalc.studies.plan import build_plan
    from cationcalc.studies.schema import WorkflowError

    path = tmp_path / "demo.yaml"
    path.write_text("study: d\nspecies: ['C']\ntasks:\n  - demo: {strength: 3}\n")
    plan = build_plan(load_workflow(path))
    assert [(t.name, t.options) for t in plan.tasks] == [("demo", {"strength": 3.0, "loud": False})]
    path.write_text("study: d\nspecies: ['C']\ntasks:\n  - demo: {strenght: 3}\n")
    with pytest.raises(WorkflowError, match="did you mean 'strength'"):
        load_workflow(path)


def test_an_unregistered_spec_is_gone_from_both(demo_task):
    unregister("demo")
    assert "demo" not in _subcommands() and "demo" not in KNOWN_TASKS
    with pytest.raises(ValueError, match="unknown task 'demo'"):
        spec("demo")
