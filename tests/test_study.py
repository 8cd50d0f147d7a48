"""Workflow files: schema errors with file/line/key, the plan, executors, resume after a kill."""

import json
import os
import signal
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from cationcalc.about import SAFETY_NOTE
from cationcalc.cli.run_command import main
from cationcalc.studies.workflow import WorkflowError, build_plan, load_workflow, run_study
from store_probe import start_until_first_species, stored_species

ROOT = Path(__file__).resolve().parents[1]


def write(folder: Path, text: str, name: str = "study.yaml") -> Path:
    path = folder / name
    path.write_text(textwrap.dedent(text).lstrip())
    return path


def error_of(path: Path) -> str:
    with pytest.raises(WorkflowError) as info:
        build_plan(load_workflow(path))
    message = str(info.value)
    assert "\n" not in message
    return message


# ---------------------------------------------------------------------------------------------
# schema errors
# ---------------------------------------------------------------------------------------------

def test_misspelt_key_names_file_line_key_and_the_closest_valid_key(tmp_path):
    path = write(tmp_path, """
        study: typo
        method:
          engine: tblite
          solvnt: water
        species: ["C[C+](C)C"]
        tasks: [hia]
    """)
    message = error_of(path)
    assert message.startswith(f"{path}:4: ")
    assert "unknown key 'solvnt' in method" in message and "did you mean 'solvent'?" in message


def test_misspelt_top_level_key(tmp_path):
    path = write(tmp_path, """
        study: typo
        species: ["C[C+](C)C"]
        taks: [hia]
    """)
    message = error_of(path)
    assert f"{path}:3: unknown key 'taks' at the top level; did you mean 'tasks'?" in message


def test_misspelt_task_name_in_a_list(tmp_path):
    path = write(tmp_path, """
        study: typo
        species: ["CC(C)(C)Cl"]
        tasks:
          - hia
          - heterolysys
    """)
    message = error_of(path)
    assert message.startswith(f"{path}:5: ") and "'heterolysys'" in message and "did you mean 'heterolysis'" in message


def test_wrong_type_names_the_key_and_the_value(tmp_path):
    path = write(tmp_path, """
        study: wrong-type
        species: ["C[C+](C)C"]
        tasks: [hia]
        method:
          temperature_k: warm
    """)
    message = error_of(path)
    assert message.startswith(f"{path}:5: key 'method.temperature_k': ")
    assert "number" in message and "'warm'" in message


def test_wrong_type_deep_in_a_species_list(tmp_path):
    path = write(tmp_path, """
        study: wrong-type
        species:
          - {smiles: "C[C+](C)C", name: tBu}
          - {smiles: "CC[CH2+]", name: [not, a, name]}
        tasks: [hia]
    """)
    message = error_of(path)
    assert message.startswith(f"{path}:4: key 'species[1].name'")


def test_missing_species_file_names_the_file_the_line_and_the_fix(tmp_path):
    path = write(tmp_path, """
        study: missing-file
        tasks: [hia]
        species:
          - file: cations/missing.smi
    """)
    message = error_of(path)
    assert message.startswith(f"{path}:4: species file 'cations/missing.smi'")
    assert "not found" in message and "relative to the workflow file" in message


def test_unknown_solvent_and_unknown_reference_point_at_their_lines(tmp_path):
    path = write(tmp_path, """
        study: s
        species: ["C[C+](C)C"]
        method: {solvent: [none, watr]}
        tasks: [hia]
    """)
    message = error_of(path)
    assert message.startswith(f"{path}:3: key 'method.solvent'") and "did you mean water" in message
    path = write(tmp_path, """
        study: s
        species: ["C[C+](C)C"]
        tasks:
          - hia: {reference: tert-buty}
    """)
    assert error_of(path).startswith(f"{path}:4: key 'tasks.hia.reference'")


def test_yaml_syntax_and_duplicate_keys(tmp_path):
    path = write(tmp_path, "study: s\nspecies: [\"C\"\ntasks: [thermo]\n")
    assert error_of(path).startswith(f"{path}:") and "YAML syntax" in error_of(path)
    path = write(tmp_path, "study: s\nspecies: ['C']\ntasks: [thermo]\nstudy: t\n")
    assert error_of(path) == f"{path}:4: key 'study' appears twice in one mapping; keep one"


def test_a_task_whose_code_is_not_installed_is_refused_at_plan_time(tmp_path, monkeypatch):
    import cationcalc.tasks.runner

    monkeypatch.setattr(cationcalc.tasks.runner, "TASKS", ("hia", "heterolysis"))
    path = write(tmp_path, """
        study: s
        species: ["O"]
        tasks:
          - hia
          - thermo
    """)
    message = error_of(path)
    assert message.startswith(f"{path}:5: task 'thermo' is not available") and "hia, heterolysis" in message


def test_cli_gives_one_line_exit_2_and_touches_nothing(tmp_path, capsys):
    path = write(tmp_path, """
        study: s
        species: ["C[C+](C)C"]
        tasks: [hia]
        output: {folder: out, formt: [csv]}
    """)
    assert main([str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and "did you mean 'formats'" in err
    assert not (tmp_path / "out").exists()
    assert main([str(tmp_path / "nope.yaml")]) == 2
    assert "cannot read workflow file" in capsys.readouterr().err


# ---------------------------------------------------------------------------------------------
# species files and the plan
# ---------------------------------------------------------------------------------------------

def test_species_files_and_per_entry_tasks(tmp_path):
    (tmp_path / "a.csv").write_text("Name,SMILES\ntert-butyl,C[C+](C)C\n2-propyl,C[CH+]C\n")
    (tmp_path / "b.smi").write_text("# comment\nCC(C)(C)Cl  tert-butyl chloride\n")
    from rdkit import Chem

    writer = Chem.SDWriter(str(tmp_path / "c.sdf"))
    mol = Chem.MolFromSmiles("CCCl")
    mol.SetProp("_Name", "chloroethane")
    writer.write(mol)
    writer.close()
    path = write(tmp_path, """
        study: files
        species:
          - {file: a.csv, tasks: [hia]}
          - {file: b.smi, tasks: [heterolysis]}
          - {file: c.sdf, tasks: [heterolysis]}
        tasks: [hia, heterolysis]
        method: {solvent: [none, water, dcm]}
    """)
    plan = build_plan(load_workflow(path))
    assert plan.items == [("C[C+](C)C", "tert-butyl"), ("C[CH+]C", "2-propyl"), ("CC(C)(C)Cl", "tert-butyl chloride"),
                          ("CCCl", "chloroethane")]
    assert [(t.name, len(t.items)) for t in plan.tasks] == [("hia", 2), ("heterolysis", 2)]
    assert plan.solvents == [None, "water", "dichloromethane"] and plan.row_count == 12
    assert set(plan.input_files) == {"a.csv", "b.smi", "c.sdf"}
    (tmp_path / "a.csv").write_text("structure,label\nC[C+](C)C,x\n")
    assert "no 'smiles' column" in error_of(path)


def test_dry_run_prints_the_expanded_plan_and_computes_nothing(tmp_path, capsys):
    path = write(tmp_path, """
        study: dry
        species:
          - {smiles: "C[C+](C)C", name: tert-butyl, tasks: [hia]}
          - {smiles: "CC(C)(C)Cl", name: tBuCl, tasks: [heterolysis]}
        tasks: [hia, heterolysis]
        method: {solvent: [none, water]}
        output: {folder: out}
    """)
    assert main([str(path), "--dry-run"]) == 0
    out = capsys.readouterr().out
    assert "rows       2 species×task × 2 solvents = 4" in out
    assert "distinct species: 8, 0 already in the store, 8 to compute" in out  # 2 per HIA, 3 per heterolysis
    assert SAFETY_NOTE in out
    assert not (tmp_path / "out").exists()


# ---------------------------------------------------------------------------------------------
# running: executors agree, a warm re-run computes nothing and reproduces the files
# ---------------------------------------------------------------------------------------------

TWO_SPECIES = """
    study: two-species
    species:
      - {smiles: "C[C+](C)C", name: tert-butyl, tasks: [hia]}
      - {smiles: "O", name: water, tasks: [thermo]}
    tasks: [hia, thermo]
    conformers: {max_conformers: 4}
    execution: {workers: 2}
"""


def _strip(records):
    return [{k: v for k, v in r.items() if k != "profile"} for r in records]


def test_process_pool_and_dask_give_identical_numbers_and_rerun_computes_nothing(tmp_path, capsys):
    pytest.importorskip("distributed")
    path = write(tmp_path, TWO_SPECIES)
    pool = run_study(path, output=str(tmp_path / "pool"))
    assert (pool.computed, pool.failed, pool.reused) == (3, 0, 0)  # tBu+, isobutane, water
    dask = run_study(path, output=str(tmp_path / "dask"), scheduler="dask-local", workers=2)
    assert (dask.computed, dask.failed) == (3, 0)
    assert pool.records == dask.records
    assert isinstance(pool.records[0]["hia_kcal_mol"], float)
    for name in ("results.csv", "structures.sdf"):
        assert (tmp_path / "pool" / name).read_bytes() == (tmp_path / "dask" / name).read_bytes()
    pool_json = json.loads((tmp_path / "pool" / "results.json").read_text())
    dask_json = json.loads((tmp_path / "dask" / "results.json").read_text())
    assert pool_json["records"] == dask_json["records"]

    before = {p: (p.read_bytes(), p.stat().st_mtime_ns) for p in (tmp_path / "pool").rglob("*")
              if p.is_file() and "store.sqlite" not in p.name}
    assert main([str(path), "--output", str(tmp_path / "pool"), "--workers", "2"]) == 0
    out = capsys.readouterr().out
    assert "species: 0 computed, 0 failed, 3 read from the store" in out and SAFETY_NOTE in out
    after = {p: (p.read_bytes(), p.stat().st_mtime_ns) for p in before}
    assert after == before  # same bytes, files not even rewritten


# ---------------------------------------------------------------------------------------------
# resume after SIGKILL and SIGINT
# ---------------------------------------------------------------------------------------------

MANY = ["CC(C)(C)Cl", "CCC(C)(C)Cl", "CCCCO", "CC(C)CCO", "CCOCC", "CCCCCC", "CC(C)(C)O", "CCOC(C)=O"]


def _start_and_stop(path: Path, store: Path, sig: int) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    proc = start_until_first_species(["run", str(path), "--workers", "1", "--quiet"], store, env)
    proc.send_signal(sig)
    out, err = proc.communicate(timeout=60)
    return subprocess.CompletedProcess(proc.args, proc.returncode, out, err)


@pytest.mark.parametrize("sig", [signal.SIGKILL, signal.SIGINT], ids=["SIGKILL", "SIGINT"])
def test_a_killed_run_resumes_computing_only_what_is_missing(tmp_path, sig):
    species = "\n".join(f'  - {{smiles: "{s}", name: m{i}}}' for i, s in enumerate(MANY))
    path = write(tmp_path, f"study: resume\nspecies:\n{species}\ntasks: [thermo]\n"
                           "conformers: {max_conformers: 3}\noutput: {folder: out}\n")
    store = tmp_path / "out" / "store.sqlite"
    stopped = _start_and_stop(path, store, sig)
    if sig == signal.SIGINT:
        assert stopped.returncode == 130 and "run the same command again to resume" in stopped.stderr, stopped
    else:
        assert stopped.returncode == -signal.SIGKILL
    assert not (tmp_path / "out" / "results.json").exists()  # no partial outputs
    kept = stored_species(store)
    assert 1 <= kept < len(MANY)
    from cationcalc.execution.store import ResultStore

    with ResultStore(store) as s:
        assert s.integrity() == "ok"
    resumed = run_study(path, workers=1)
    assert (resumed.computed, resumed.reused, resumed.failed) == (len(MANY) - kept, kept, 0)
    assert stored_species(store) == len(MANY)
    assert len(resumed.records) == len(MANY) and not any(r.get("error") for r in resumed.records)
    again = run_study(path, workers=1)
    assert (again.computed, again.reused) == (0, len(MANY)) and again.records == resumed.records


def test_two_runs_sharing_one_store_at_once(tmp_path):
    species = "\n".join(f'  - {{smiles: "{s}", name: m{i}}}' for i, s in enumerate(MANY[:5]))
    paths = []
    for name in ("first", "second"):
        paths.append(write(tmp_path, f"study: {name}\nspecies:\n{species}\ntasks: [thermo]\n"
                                     "conformers: {max_conformers: 3}\n"
                                     f"output: {{folder: {name}, store: ../shared.sqlite}}\n", f"{name}.yaml"))
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    procs = [subprocess.Popen([sys.executable, "-m", "cationcalc.cli", "run", str(p), "--workers", "1", "--quiet"],
                              stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env) for p in paths]
    outputs = [p.communicate(timeout=300) for p in procs]
    assert [p.returncode for p in procs] == [0, 0], outputs
    from cationcalc.execution.store import ResultStore

    with ResultStore(tmp_path / "shared.sqlite") as store:
        assert store.integrity() == "ok" and len(store) == 5
    first, second = (json.loads((tmp_path / n / "results.json").read_text())["records"] for n in ("first", "second"))
    assert first == second


@pytest.mark.parametrize("example", sorted((ROOT / "workflows").glob("*.yaml")), ids=lambda p: p.name)
def test_example_studies_are_valid_and_plan_rows(example, capsys):
    plan = build_plan(load_workflow(example))
    assert plan.row_count > 0 and plan.tasks
    assert main([str(example), "--dry-run"]) == 0
    out = capsys.readouterr().out
    assert f"study {plan.workflow.study}:" in out and "rejected by" not in out


def test_run_help_exits_0(capsys):
    assert main(["--help"]) == 0
    assert "--dry-run" in capsys.readouterr().out


@pytest.mark.slow
def test_readme_study_runs_clean_and_a_rerun_computes_nothing(tmp_path):
    first = run_study(ROOT / "workflows" / "readme_study.yaml", output=str(tmp_path / "out"))
    assert first.failed == 0 and first.records and not any(r.get("error") for r in first.records)
    again = run_study(ROOT / "workflows" / "readme_study.yaml", output=str(tmp_path / "out"))
    assert again.computed == 0 and again.records == first.records
