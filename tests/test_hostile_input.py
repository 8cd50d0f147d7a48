"""Hostile and careless input: every case is a one-line refusal or a safe result, and nothing is lost.

Command-line ranges and misspellings, study-file paths and YAML aliases, bounded
temperature and pressure, isotope labels, unwritable stores and folders,
SIGTERM and killed parents, names that would corrupt SDF/XYZ/CSV files,
one worker against a pool, damaged stores, long inputs, empty SDF files and
Dask's scratch folder.  The slow parts compute tiny species only (H2, H2O).
"""

import json
import math
import os
import signal
import sqlite3
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from cationcalc.cli.main import COLUMNS, build_parser, main
from cationcalc.chem.conformers import ConformerSettings
from cationcalc.execution.executors import SpeciesFailure, compute_many, compute_one
from cationcalc.compute.models import PRESSURE_RANGE_PA, TEMPERATURE_RANGE_K, Settings, SpeciesResult
from cationcalc.chem.species import InputError, Species, species
from cationcalc.execution.store import ResultStore, StoreError
from cationcalc.studies.workflow import WorkflowError, build_plan, describe_plan, load_workflow
from cationcalc.cli.run_command import main as run_main
from store_probe import sigint_ignored, start_until_first_species, stored_species

ROOT = Path(__file__).resolve().parents[1]
FEW = ConformerSettings(max_conformers=2, n_optimize=1)


def write(folder: Path, text: str, name: str = "study.yaml") -> Path:
    path = folder / name
    path.write_text(textwrap.dedent(text).lstrip())
    return path


def one_line_error(capsys) -> str:
    err = capsys.readouterr().err.strip()
    assert err and "\n" not in err, err
    return err


@pytest.fixture(scope="module")
def water_result():
    return compute_one(species("O"), Settings(conformers=FEW))


# ---------------------------------------------------------------------------------------------
# 11. ranges, misspellings and --refine on the command line
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("argv, words", [
    (["hia", "C[C+](C)C", "--temperature", "-5"], "outside 50-3000 K"),
    (["hia", "C[C+](C)C", "--temperature", "1e150"], "outside 50-3000 K"),
    (["hia", "C[C+](C)C", "--temperature", "nan"], "outside 50-3000 K"),
    (["thermo", "C", "--conformers", "0"], "--conformers: 0 is below 1"),
    (["thermo", "C", "--pressure", "-1"], "outside 1-1e+07 Pa"),
    (["thermo", "C", "--workers", "0"], "--workers: 0 is below 1"),
    (["hai", "C[C+](C)C"], "did you mean 'hia'"),
    (["thermo", "C", "--temprature", "300"], "did you mean '--temperature'"),
    (["thermo", "C", "--calibrated"], "--calibrated applies only to: hia, sites"),
])
def test_bad_command_lines_are_one_line_usage_errors_with_exit_2(argv, words, capsys):
    assert main(argv) == 2
    assert words in one_line_error(capsys)


def test_run_and_check_suggest_too(tmp_path, capsys):
    from cationcalc.cli.check_command import main as check_main

    assert run_main([str(tmp_path / "x.yaml"), "--wrokers", "2"]) == 2
    assert "did you mean '--workers'" in one_line_error(capsys)
    assert run_main([str(tmp_path / "x.yaml"), "--workers", "0"]) == 2
    assert "below 1" in one_line_error(capsys)
    assert check_main(["--quik"]) == 2
    assert "did you mean '--quick'" in one_line_error(capsys)


def test_refine_never_swallows_a_smiles():
    from cationcalc.cli.arguments import split_refine
    from cationcalc.execution.refine import DEFAULT_LEVEL

    parser = build_parser()
    args = parser.parse_args(split_refine(["hia", "--refine", "[CH2+]c1ccccc1", "C[CH+]C"]))
    assert args.smiles == ["[CH2+]c1ccccc1", "C[CH+]C"] and args.refine == DEFAULT_LEVEL
    args = parser.parse_args(split_refine(["hia", "--refine=B3LYP-D3BJ/def2-SVP", "C[CH+]C"]))
    assert args.smiles == ["C[CH+]C"] and args.refine == "B3LYP-D3BJ/def2-SVP"
    assert parser.parse_args(["hia", "C[CH+]C"]).refine is None


def test_smiles_after_a_bare_refine_are_inputs(monkeypatch):
    import cationcalc.cli.main as cli
    import cationcalc.engines.pyscf_engine as pyscf_engine

    seen = {}

    def fake_run(args, items, settings, workers, progress, store):
        seen["items"], seen["refine"] = items, args.refine
        return []

    monkeypatch.setattr(pyscf_engine, "require_pyscf", lambda: None)
    monkeypatch.setattr(cli, "_run", fake_run)
    assert main(["hia", "[CH2+]c1ccccc1", "--refine", "C[CH+]C", "--json"]) == 0
    assert [t for t, _ in seen["items"]] == ["[CH2+]c1ccccc1", "C[CH+]C"]


# ---------------------------------------------------------------------------------------------
# 12. help, units and plan labels
# ---------------------------------------------------------------------------------------------

def test_calibrated_only_where_a_calibration_exists(capsys):
    parser = build_parser()
    commands = parser._subparsers._group_actions[0].choices
    with_option = {name for name, sub in commands.items()
                   if any("--calibrated" in a.option_strings for a in sub._actions)}
    assert with_option == {"hia", "sites"}  # the HIA calibration (calibration.py) is all there is


def test_thermo_energy_columns_carry_units():
    headers = dict(COLUMNS["thermo"])
    for key in ("zpe_kcal_mol", "H_kcal_mol", "G_kcal_mol"):
        assert headers[key].endswith("kcal/mol"), headers[key]


def test_quick_check_is_described_with_the_same_words_in_help_and_readme():
    from cationcalc.cli.check_command import build_parser as check_parser

    help_text = next(a.help for a in check_parser()._actions if "--quick" in a.option_strings)
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    assert "a small subset of cheap species" in help_text and "a small subset of cheap species" in readme
    assert "--quick` runs a subset in under a minute" not in readme and "two minutes" not in help_text


def test_dry_run_counts_species_per_source(tmp_path, capsys):
    (tmp_path / "more.smi").write_text("C[CH+]C 2-propyl\nCC[CH+]C 2-butyl\nC[C+](C)CC t-amyl\n")
    path = write(tmp_path, """
        study: sources
        species: ["C[C+](C)C", {smiles: "[CH2+]c1ccccc1", name: benzyl}, {file: more.smi}]
        tasks: [hia]
    """)
    text = describe_plan(build_plan(load_workflow(path)))
    assert "species    5 (2 inline, 3 from more.smi)" in text


# ---------------------------------------------------------------------------------------------
# 13. a study file reads and writes only inside its own folder
# ---------------------------------------------------------------------------------------------

def _plan_error(path: Path, **kwargs) -> str:
    with pytest.raises(WorkflowError) as info:
        build_plan(load_workflow(path), **kwargs)
    message = str(info.value)
    assert "\n" not in message
    return message


@pytest.mark.parametrize("entry", ["/etc/passwd", "../../../../../../etc/passwd", "/proc/self/environ"])
def test_species_files_outside_the_workflow_folder_are_refused(tmp_path, entry):
    path = write(tmp_path, f"""
        study: s
        species: [{{file: "{entry}"}}]
        tasks: [hia]
    """)
    message = _plan_error(path)
    assert "outside the workflow's folder" in message or "system file" in message
    assert "root:" not in message


def test_symlink_escape_system_files_and_odd_formats_are_refused(tmp_path):
    inside = tmp_path / "study"
    inside.mkdir()
    outside = tmp_path / "elsewhere.smi"
    outside.write_text("C[CH+]C secret-name\n")
    (inside / "link.smi").symlink_to(outside)
    path = write(inside, "study: s\nspecies: [{file: link.smi}]\ntasks: [hia]\n")
    assert "--allow-outside-paths" in _plan_error(path)
    plan = build_plan(load_workflow(path), allow_outside=True)  # the user said so
    assert plan.items == [("C[CH+]C", "secret-name")]
    # a system file stays refused even then; a file without a species-file ending needs format:
    (inside / "env").symlink_to("/proc/self/environ")
    path = write(inside, "study: s\nspecies: [{file: env}]\ntasks: [hia]\n")
    assert "system file" in _plan_error(path, allow_outside=True)
    (inside / "notes").write_text("C[CH+]C\n")
    path = write(inside, "study: s\nspecies: [{file: notes}]\ntasks: [hia]\n")
    assert "set format" in _plan_error(path)
    (inside / "folder.smi").mkdir()
    path = write(inside, "study: s\nspecies: [{file: folder.smi}]\ntasks: [hia]\n")
    assert "not a regular file" in _plan_error(path)


def test_output_folder_and_store_stay_inside_unless_allowed(tmp_path, capsys):
    inside = tmp_path / "study"
    inside.mkdir()
    path = write(inside, "study: s\nspecies: [C]\ntasks: [thermo]\noutput: {folder: ../../out}\n")
    assert "key output.folder" in _plan_error(path)
    path = write(inside, "study: s\nspecies: [C]\ntasks: [thermo]\noutput: {store: /tmp/x/store.sqlite}\n")
    assert "key output.store" in _plan_error(path)
    path = write(inside, "study: s\nspecies: [C]\ntasks: [thermo]\noutput: {store: ../../../shared.sqlite}\n")
    assert "key output.store" in _plan_error(path)
    assert build_plan(load_workflow(path), allow_outside=True).store_path == (tmp_path / "shared.sqlite")
    assert run_main([str(path), "--dry-run"]) == 2
    assert "--allow-outside-paths" in one_line_error(capsys)
    assert run_main([str(path), "--dry-run", "--allow-outside-paths"]) == 0


# ---------------------------------------------------------------------------------------------
# 14. YAML aliases
# ---------------------------------------------------------------------------------------------

LAUGHS = "\n".join(["a: &a [\"lol\",\"lol\",\"lol\",\"lol\",\"lol\",\"lol\",\"lol\",\"lol\",\"lol\"]"]
                   + [f"{chr(98 + i)}: &{chr(98 + i)} [{','.join(['*' + chr(97 + i)] * 9)}]" for i in range(8)]
                   + ["study: laughs", "species: [C]", "tasks: [hia]"]) + "\n"


@pytest.mark.parametrize("text", [LAUGHS, "study: &s [*s]\nspecies: [C]\ntasks: [hia]\n",
                                  "study: x\nspecies: &sp [C]\nmore: *sp\ntasks: [hia]\n"])
def test_yaml_aliases_are_refused_at_once(tmp_path, capsys, text):
    path = tmp_path / "alias.yaml"
    path.write_text(text)
    start = time.perf_counter()
    assert run_main([str(path), "--dry-run"]) == 2
    assert time.perf_counter() - start < 5
    err = one_line_error(capsys)
    assert "YAML alias" in err and f"{path}:" in err


# ---------------------------------------------------------------------------------------------
# 15. temperature and pressure bounded everywhere; no NaN written; a bad store row is recomputed
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("field, value", [("temperature_k", 1e6), ("temperature_k", float("nan")),
                                          ("temperature_k", 0.0), ("pressure_pa", float("inf")),
                                          ("pressure_pa", 0.0)])
def test_library_settings_refuse_unphysical_temperature_and_pressure(field, value):
    with pytest.raises(ValueError, match="outside"):
        Settings(**{field: value})
    low, high = TEMPERATURE_RANGE_K if field == "temperature_k" else PRESSURE_RANGE_PA
    Settings(**{field: low}), Settings(**{field: high})  # the ends are allowed


def test_workflow_temperature_is_bounded_with_file_and_line(tmp_path, capsys):
    path = write(tmp_path, "study: hot\nspecies: [C]\ntasks: [thermo]\nmethod:\n  temperature_k: 1.0e150\n")
    assert run_main([str(path), "--dry-run"]) == 2
    err = one_line_error(capsys)
    assert f"{path}:5" in err and "outside 50-3000 K" in err


def test_no_nan_reaches_json_and_a_species_result_refuses_it(water_result):
    from cationcalc.report.files import records_json

    data = json.loads(records_json([{"x": float("nan"), "y": [1.0, float("inf")]}], {"study": "s"}))
    assert data["records"] == [{"x": None, "y": [1.0, None]}]
    with pytest.raises(ValueError):
        SpeciesResult.model_validate({**water_result.model_dump(), "G_hartree": float("nan")})


def test_a_store_row_that_fails_validation_is_recomputed(tmp_path):
    settings = Settings(conformers=FEW)
    path = tmp_path / "store.sqlite"
    hydrogen = species("[H][H]")
    with ResultStore(path) as store:
        first = compute_many([hydrogen], settings, store=store)[hydrogen]
    db = sqlite3.connect(path)
    row = json.loads(db.execute("SELECT result FROM species").fetchone()[0])
    row["G_hartree"] = None  # what an older version wrote for NaN
    db.execute("UPDATE species SET result = ?", (json.dumps(row),))
    db.commit()
    db.close()
    computed = []
    with ResultStore(path) as store:
        again = compute_many([hydrogen], settings, store=store, progress=lambda sp, r: computed.append(sp))
        assert computed == [hydrogen] and store.invalid_keys == [first.key] and store.writes == 1
    assert again[hydrogen].G_hartree == first.G_hartree
    with ResultStore(path) as store:  # the repaired row is read from now on
        assert store.get(first.key) is not None and store.hits == 1


# ---------------------------------------------------------------------------------------------
# 16. isotope labels
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("text, label", [("[2H][C+]([2H])[2H]", "[2H]"), ("[13CH3+]", "[13C]")])
def test_isotope_labels_are_refused_in_one_line(text, label, capsys):
    with pytest.raises(InputError, match="isotope labels"):
        species(text)
    assert main(["hia", text, "--json", "--workers", "1"]) == 1
    record = json.loads(capsys.readouterr().out)[0]
    assert label in record["error"] and "remove the labels" in record["error"] and "\n" not in record["error"]


# ---------------------------------------------------------------------------------------------
# 17. unwritable outputs are found before computing; a failed write keeps the results
# ---------------------------------------------------------------------------------------------

def _never_compute(monkeypatch):
    import cationcalc.execution.executors as executors

    def refuse(*args, **kwargs):
        raise AssertionError("computed although the outputs cannot be written")

    monkeypatch.setattr(executors, "compute_one", refuse)


def test_an_output_folder_that_is_a_file_is_refused_before_computing(tmp_path, monkeypatch, capsys):
    _never_compute(monkeypatch)
    (tmp_path / "out").write_text("I am a file\n")
    path = write(tmp_path, "study: s\nspecies: ['[H][H]']\ntasks: [thermo]\noutput: {folder: out}\n")
    assert run_main([str(path)]) == 2
    assert "is an existing file" in one_line_error(capsys)
    assert (tmp_path / "out").read_text() == "I am a file\n"


def test_a_store_that_cannot_be_written_is_refused_before_computing(tmp_path, monkeypatch, capsys):
    _never_compute(monkeypatch)
    (tmp_path / "blocker").write_text("x")
    assert main(["thermo", "[H][H]", "--store", str(tmp_path / "blocker" / "s.sqlite")]) == 2
    assert "is not a folder" in one_line_error(capsys)
    store = tmp_path / "ro.sqlite"
    ResultStore(store).close()
    real = os.access
    monkeypatch.setattr(os, "access", lambda p, mode, **kw: False if str(p) == str(store) else real(p, mode, **kw))
    assert main(["thermo", "[H][H]", "--store", str(store)]) == 2  # root ignores chmod, hence os.access
    assert "not writable" in one_line_error(capsys)


def test_a_store_write_that_fails_mid_run_keeps_the_results(tmp_path, capsys):
    settings = Settings(conformers=FEW)
    with ResultStore(tmp_path / "s.sqlite") as store:
        def broken(*args, **kwargs):
            raise sqlite3.OperationalError("disk I/O error")

        store._retry = broken
        out = compute_many([species("[H][H]")], settings, store=store)
        assert not isinstance(out[species("[H][H]")], SpeciesFailure)
        assert "disk I/O error" in store.write_error


def test_outputs_that_fail_mid_run_are_rescued_and_named(tmp_path, monkeypatch, capsys):
    import cationcalc.report.outputs as report

    path = write(tmp_path, "study: s\nspecies: ['[H][H]']\ntasks: [thermo]\nconformers: {max_conformers: 2}\n"
                           "output: {folder: out}\nexecution: {workers: 1}\n")
    monkeypatch.setattr(report, "write_atomic", lambda *a, **k: (_ for _ in ()).throw(OSError(28, "No space left")))
    monkeypatch.setattr("tempfile.tempdir", str(tmp_path))
    assert run_main([str(path), "--quiet"]) == 1
    err = capsys.readouterr().err
    assert "cannot write the outputs" in err and "No space left" in err and "store.sqlite" in err
    rescued = list(tmp_path.glob("cationcalc-s-*.json"))
    assert len(rescued) == 1 and json.loads(rescued[0].read_text())[0]["smiles"] == "[H][H]"
    assert stored_species(tmp_path / "out" / "store.sqlite") == 1


# ---------------------------------------------------------------------------------------------
# 18. SIGTERM is Ctrl-C; pool workers die with their parent
# ---------------------------------------------------------------------------------------------

def _env(tmp_path):
    return {**os.environ, "PYTHONPATH": str(ROOT)}


INPUTS = ["O", "C", "N", "CC(C)(C)Cl", "CCCCCCCCO", "CCOC(C)=O", "CCCCCCCC", "CC(C)CCCCO"]


@pytest.mark.parametrize("workers", [1, 2])
def test_sigterm_keeps_what_finished_and_exits_non_zero(tmp_path, workers):
    store = tmp_path / "store.sqlite"
    proc = start_until_first_species(["thermo", *INPUTS, "--json", "--workers", str(workers), "--store", str(store)],
                                     store, _env(tmp_path))
    proc.send_signal(signal.SIGTERM)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 143, err
    assert "stopped by SIGTERM" in err
    records = json.loads(out)
    finished = [r for r in records if "error" not in r]
    assert len(records) == len(INPUTS) and 1 <= len(finished) < len(INPUTS)
    assert stored_species(store) >= len(finished)


def test_a_background_job_ignores_ctrl_c_but_stops_on_sigterm(tmp_path):
    # a command started with "&" from a script (or nohup) inherits SIGINT ignored; SIGTERM, how schedulers and
    # kill stop jobs, must still stop it and keep what finished, and a plain SIGINT must stay ignored
    # (POSIX shells ignore SIGINT in background jobs: common practice, no source)
    store = tmp_path / "store.sqlite"
    proc = start_until_first_species(["thermo", *INPUTS, "--json", "--workers", "1", "--store", str(store)],
                                     store, _env(tmp_path), preexec_fn=sigint_ignored)
    proc.send_signal(signal.SIGINT)
    time.sleep(0.5)
    assert proc.poll() is None, proc.communicate()
    proc.send_signal(signal.SIGTERM)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 143, err
    assert "stopped by SIGTERM" in err
    assert 1 <= stored_species(store) < len(INPUTS)
    assert len(json.loads(out)) == len(INPUTS)


def test_sigterm_stops_a_study_like_ctrl_c(tmp_path):
    species_lines = "\n".join(f'  - {{smiles: "{s}", name: m{i}}}' for i, s in enumerate(INPUTS))
    path = write(tmp_path, f"study: term\nspecies:\n{species_lines}\ntasks: [thermo]\n"
                           "conformers: {max_conformers: 3}\noutput: {folder: out}\nexecution: {workers: 1}\n")
    store = tmp_path / "out" / "store.sqlite"
    proc = start_until_first_species(["run", str(path), "--quiet"], store, _env(tmp_path))
    proc.send_signal(signal.SIGTERM)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 143 and "stopped by SIGTERM" in err and "resume" in err, err
    assert 1 <= stored_species(store) < len(INPUTS)
    assert not (tmp_path / "out" / "results.json").exists()


def _children(pid: int) -> set[int]:
    found = set()
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                fields = (entry / "stat").read_text().rsplit(")", 1)[1].split()
            except OSError:
                continue
            if int(fields[1]) == pid and fields[0] != "Z":
                found.add(int(entry.name))
    return found


def _alive(pid: int) -> bool:
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state != "Z"


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")
def test_pool_workers_exit_when_the_parent_is_killed(tmp_path):
    proc = subprocess.Popen([sys.executable, "-m", "cationcalc.cli", "thermo", *INPUTS, "--json", "--workers", "2"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=_env(tmp_path))
    deadline = time.monotonic() + 60
    children: set[int] = set()
    while len(children) < 3:  # two workers and the resource tracker
        assert proc.poll() is None
        assert time.monotonic() < deadline, f"workers did not start: {children}"
        children = _children(proc.pid)
        time.sleep(0.1)
    time.sleep(1.0)  # the workers have run their start-up
    proc.kill()
    proc.wait()
    deadline = time.monotonic() + 20
    while any(_alive(c) for c in children):
        if time.monotonic() > deadline:
            for c in children:
                if _alive(c):
                    os.kill(c, signal.SIGKILL)  # clean up what this test started
            pytest.fail("pool processes outlived their parent")
        time.sleep(0.1)


# ---------------------------------------------------------------------------------------------
# 19. names cannot break SDF, XYZ or CSV files
# ---------------------------------------------------------------------------------------------

def test_newlines_in_names_do_not_corrupt_sdf_or_xyz(water_result):
    from rdkit import Chem

    from cationcalc.report.files import structures_sdf, xyz_files

    prov = {"study": "s", "workflow_sha256": "0" * 64, "versions": {"cationcalc": "test"}}
    evil = "water\n$$$$\nM  END\r\n3\ninjected"
    names = {water_result.smiles: [evil]}
    sdf = structures_sdf([water_result], names, prov).decode()
    supplier = Chem.SDMolSupplier()
    supplier.SetData(sdf, removeHs=False)
    mols = list(supplier)
    assert len(mols) == 1 and mols[0] is not None and mols[0].GetNumAtoms() == 3
    assert "\n" not in mols[0].GetProp("_Name") and mols[0].GetProp("_Name").startswith("water")
    text = next(iter(xyz_files([water_result], names, prov).values())).decode()
    lines = text.splitlines()
    assert lines[0] == "3" and len(lines) == 2 + 3  # count, one comment line, three atoms
    assert 'name="water $ $ $ $ M  END 3 injected"' in lines[1]


def test_csv_text_cells_cannot_become_formulas_but_numbers_stay_numbers():
    import csv
    import io

    from cationcalc.report.files import csv_text

    records = [{"name": "=HYPERLINK(\"http://x\",\"y\")", "note": "+1 of 2", "who": "@SUM(A1)",
                "dash": "-cmd|' /C calc'!A0", "dG_kcal_mol": -5.25, "text_number": "-1.5", "smiles": "C[C+](C)C"}]
    row = next(csv.DictReader(io.StringIO(csv_text(records))))
    assert row["name"].startswith("'=") and row["note"] == "'+1 of 2" and row["who"] == "'@SUM(A1)"
    assert row["dash"].startswith("'-")
    assert float(row["dG_kcal_mol"]) == -5.25 and row["text_number"] == "-1.5" and row["smiles"] == "C[C+](C)C"


# ---------------------------------------------------------------------------------------------
# 20. one worker and a pool give the same outcome for a species that raises
# ---------------------------------------------------------------------------------------------

def test_an_unexpected_exception_is_an_error_row_on_any_worker_count():
    settings = Settings(conformers=FEW)
    broken = Species("[H][H]", None, 1)  # charge None: a TypeError deep in the engine call
    outcomes = {}
    for workers in (1, 2):
        out = compute_many([broken, species("[H][H]")], settings, workers=workers)
        assert isinstance(out[broken], SpeciesFailure) and not isinstance(out[species("[H][H]")], SpeciesFailure)
        outcomes[workers] = out[broken].message
    assert outcomes[1] == outcomes[2] and "TypeError" in outcomes[1] and "\n" not in outcomes[1]


# ---------------------------------------------------------------------------------------------
# 21. damaged stores, special files, long inputs, empty SDF, Dask's scratch folder
# ---------------------------------------------------------------------------------------------

def test_a_store_damaged_in_the_middle_is_refused_in_one_line(tmp_path, water_result, capsys):
    path = tmp_path / "s.sqlite"
    with ResultStore(path) as store:
        for i in range(40):
            store.put(water_result.model_copy(update={"key": f"{i:064d}"}))
    db = sqlite3.connect(path)
    db.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    db.close()
    data = bytearray(path.read_bytes())
    page = 4096
    assert len(data) > 6 * page
    data[3 * page:5 * page] = os.urandom(2 * page)  # garbage pages after the header page
    path.write_bytes(bytes(data))
    with pytest.raises(StoreError) as info:
        ResultStore(path)
    assert "\n" not in str(info.value) and "s.sqlite" in str(info.value)
    assert main(["thermo", "[H][H]", "--store", str(path)]) == 2
    assert "s.sqlite" in one_line_error(capsys)


def test_store_on_a_device_is_refused(capsys):
    with pytest.raises(StoreError, match="not a regular file"):
        ResultStore("/dev/null")
    assert main(["thermo", "[H][H]", "--store", "/dev/null"]) == 2
    assert "not a regular file" in one_line_error(capsys)
    assert not os.path.exists("/dev/null-journal") and not os.path.exists("/dev/null-wal")


def test_a_huge_smiles_is_not_echoed_in_full(capsys):
    huge = "C" * 100_000 + "("
    assert main(["hia", huge, "--workers", "1"]) == 1
    out = capsys.readouterr().out
    assert len(out) < 20_000 and "100001 characters" in out


def test_an_empty_sdf_names_the_file_and_the_record(tmp_path):
    (tmp_path / "empty.sdf").write_text("")
    path = write(tmp_path, "study: s\nspecies: [{file: empty.sdf}]\ntasks: [hia]\n")
    message = _plan_error(path)
    assert "empty.sdf" in message and "record 1" in message and f"{path}:2" in message


def test_dask_local_leaves_no_scratch_folder(tmp_path, monkeypatch):
    pytest.importorskip("distributed")
    from cationcalc.execution.executors import _dask_client

    scratch_root = tmp_path / "tmp"
    scratch_root.mkdir()
    monkeypatch.setattr("tempfile.tempdir", str(scratch_root))
    with _dask_client("dask-local", 1) as client:
        assert client.submit(math.sqrt, 4.0).result() == 2.0
        assert any(scratch_root.iterdir())  # the scratch space was in our folder
    assert list(scratch_root.iterdir()) == []
