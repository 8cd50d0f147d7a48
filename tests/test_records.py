"""Typed task records: every key declared, today's keys and order kept, failures typed, no record rewritten."""

import json
from pathlib import Path

import pytest
from pydantic import ValidationError

from cationcalc.compute.models import Settings
from cationcalc.execution.refine import mark_unrefined, merge_records, relabel_uncertainties, xtb_key
from cationcalc.report.outputs import csv_text, finite
from cationcalc.tasks.record_types import (FAILURES, MODELS, Failure, HeterolysisValues, HiaValues, IonizationValues,
                                           Record, ThermoValues, typed_record, typed_records)
from cationcalc.trust.uncertainty import annotate

#: the README study's records as written by version 0.1.0 before records were typed (results.json)
README_RESULTS = Path(__file__).parent / "data" / "readme_records_0.1.0.json"


@pytest.fixture(scope="module")
def readme_records() -> list[dict]:
    """The README study's records as the code before typed records wrote them (results.json)."""
    return json.loads(README_RESULTS.read_text(encoding="utf-8"))["records"]


def test_every_key_of_the_readme_study_is_a_declared_field_of_its_task(readme_records):
    assert {r["task"] for r in readme_records} == {"hia", "ionize", "rate"}
    for r in readme_records:
        declared = MODELS[r["task"]].model_fields
        assert [k for k in r if k not in declared] == [], r["task"]


def test_round_trip_keeps_keys_order_values_and_types(readme_records):
    for r in readme_records:
        typed = typed_record(r["task"], r)
        assert isinstance(typed, MODELS[r["task"]])
        back = typed.to_dict()
        assert list(back) == list(r) and back == r
        assert [type(v) for v in back.values()] == [type(v) for v in r.values()]  # no int → float
        assert json.dumps(finite(typed), ensure_ascii=False) == json.dumps(r, ensure_ascii=False)
        assert typed.model_dump() == r and json.loads(typed.model_dump_json()) == r
        assert dict(typed) == r and list(typed) == list(r) and len(typed) == len(r)
    assert csv_text(typed_records("hia", [r for r in readme_records if r["task"] == "hia"])) == \
        csv_text([r for r in readme_records if r["task"] == "hia"])


def test_a_record_reads_like_a_read_only_dict(readme_records):
    r = typed_record("hia", readme_records[0])
    assert r["hia_kcal_mol"] == readme_records[0]["hia_kcal_mol"] and r.get("error") is None
    assert "hia_kcal_mol" in r and "error" not in r and "hia_raw_kcal_mol" not in r  # declared, not set
    with pytest.raises(KeyError):
        r["hia_raw_kcal_mol"]
    with pytest.raises(TypeError):
        r["hia_kcal_mol"] = 0.0
    with pytest.raises(ValidationError):
        r.hia_kcal_mol = 0.0
    changed = r.with_values({"name": "renamed"}, drop=("warnings",))
    assert changed["name"] == "renamed" and "warnings" not in changed and r["name"] == readme_records[0]["name"]


def test_an_undeclared_key_or_a_wrong_type_is_refused(readme_records):
    with pytest.raises(ValidationError, match="hia_in_furlongs"):
        typed_record("hia", {**readme_records[0], "hia_in_furlongs": 1.0})
    with pytest.raises(ValidationError, match="hia_kcal_mol"):
        typed_record("hia", {**readme_records[0], "hia_kcal_mol": "very stable"})
    with pytest.raises(ValidationError):  # a rate record is not an HIA record
        typed_record("hia", next(r for r in readme_records if r["task"] == "rate"))


def test_a_failure_is_a_typed_record():
    from cationcalc.tasks.runner import run_task

    (failed,) = run_task("hia", [("CC", "ethane")], Settings())  # not a cation: rejected before any compute
    assert isinstance(failed, Failure) and isinstance(failed, FAILURES["hia"]) and isinstance(failed, Record)
    assert failed["error"] and failed["input"] == "CC" and list(failed)[-3:] == ["error", "warnings", "rearranged"]
    with pytest.raises(ValidationError, match="error"):
        FAILURES["hia"].from_dict({k: v for k, v in failed.items() if k != "error"})


def test_calibration_returns_new_records_and_leaves_the_input_unchanged(readme_records):
    gas = next(r for r in readme_records if r["task"] == "hia" and r["solvent"] == "none"
               and r["cation_smiles"] != "C[C+](C)C")
    record = typed_record("hia", {k: v for k, v in gas.items() if k != "task"})
    before = record.to_dict()
    (calibrated,) = annotate("hia", [record], Settings(), calibrated=True)
    assert record.to_dict() == before and list(record) == list(before)
    assert calibrated is not record and calibrated["calibrated"] is True
    assert calibrated["hia_raw_kcal_mol"] == before["hia_kcal_mol"] != calibrated["hia_kcal_mol"]
    assert calibrated["hia_G_raw_kcal_mol"] == before["hia_G_kcal_mol"]
    assert list(calibrated)[:len(before)] == list(before)  # calibrated values keep their place, raw ones follow
    assert isinstance(typed_record("hia", calibrated), MODELS["hia"])
    plain = dict(before)
    annotate("hia", [plain], Settings(), calibrated=True)
    assert plain == before


def test_refinement_labels_are_new_records(readme_records):
    gas = {k: v for k, v in readme_records[1].items() if k != "task"}  # ethyl cation, gas phase
    assert "hia_uncertainty_kcal_mol" in gas
    refined = {**gas, "refine_level": "wB97X-D3BJ/def2-TZVP"}
    (relabelled,) = relabel_uncertainties([refined], calibrated=True)
    assert "hia_uncertainty_kcal_mol" in refined and "hia_uncertainty_kcal_mol" not in relabelled
    assert relabelled["calibrated"] is False and "fitted to GFN2-xTB" in relabelled["calibration_note"]
    (interrupted,) = mark_unrefined([gas], "GFN2-xTB (gas)")
    assert interrupted["refine_level"] is None and "refine_level" not in gas
    assert interrupted["warnings"][-1].startswith("DFT refinement interrupted") and gas["warnings"] == \
        readme_records[1]["warnings"]
    xtb = {k: v for k, v in gas.items() if not k.endswith("_uncertainty_kcal_mol")}  # refined before annotate
    merged = merge_records({**xtb, "hia_kcal_mol": 230.0}, xtb)
    assert list(merged).index("hia_xtb_kcal_mol") == list(merged).index("hia_kcal_mol") + 1
    assert isinstance(typed_record("hia", merged), MODELS["hia"])


@pytest.mark.parametrize("task,values", [("hia", HiaValues), ("sites", HiaValues), ("heterolysis", HeterolysisValues),
                                         ("thermo", ThermoValues), ("ionize", IonizationValues),
                                         ("sites", IonizationValues), ("ladder", IonizationValues)])
def test_every_computed_value_has_its_gfn2_xtb_twin_declared(task, values):
    assert values.model_fields
    for name in values.model_fields:
        assert xtb_key(name) in MODELS[task].model_fields, (task, name)
