"""The command line: tables, JSON, CSV, exit codes, and bad input that loses nothing."""

import json

import pytest

from cationcalc.cli.main import main


def test_hia_json_records_and_bad_inputs_in_one_batch(capsys):
    code = main(["hia", "xx", "CC", "C[C]C", "C[CH+]C", "--json", "--workers", "1"])
    records = json.loads(capsys.readouterr().out)
    assert code == 1  # some inputs failed, the rest were still computed and printed
    by_input = {r["input"]: r for r in records}
    assert "not a valid SMILES" in by_input["xx"]["error"]
    assert "not a monocation" in by_input["CC"]["error"]
    assert "radical" in by_input["C[C]C"]["error"]
    good = by_input["C[CH+]C"]
    for key in ("input", "name", "cation_smiles", "method", "engine", "solvent", "warnings", "rearranged",
                "hia_kcal_mol"):
        assert key in good
    assert "error" not in good and good["method"] == "GFN2-xTB" and good["engine"] == "tblite"


def test_heterolysis_csv_and_input_file(tmp_path, capsys):
    path = tmp_path / "inputs.smi"
    path.write_text("# substrates\nCC(C)(C)Cl  tert-butyl chloride\n\nCC(C)Cl isopropyl\n", encoding="utf-8")
    code = main(["heterolysis", "-i", str(path), "--csv", "--solvent", "water", "--workers", "1"])
    out = capsys.readouterr().out.splitlines()
    assert code == 0
    header = out[0].split(",")
    assert "dG_het_kcal_mol" in header and "dH_het_kcal_mol" in header
    assert len(out) == 3 and "tert-butyl chloride" in out[1]


@pytest.mark.parametrize("argv, words", [
    (["hia", "C[CH+]C", "--solvent", "plasma"], "unknown solvent"),
    (["hia", "C[CH+]C", "--reference", "unobtainium"], "unknown HIA reference"),
    (["hia"], "no inputs"),
    (["hia", "-i", "/nonexistent/file.smi"], "cannot read input file"),
])
def test_usage_errors_exit_2_with_one_line(argv, words, capsys):
    assert main(argv) == 2
    err = capsys.readouterr().err.strip()
    assert words in err and len(err.splitlines()) == 1


def test_non_utf8_input_file(tmp_path, capsys):
    path = tmp_path / "latin1.smi"
    path.write_bytes("C[CH+]C caf\xe9\n".encode("latin-1"))
    assert main(["hia", "-i", str(path)]) == 2
    assert "not UTF-8" in capsys.readouterr().err


def test_table_output_names_method_anchor_and_safety(capsys):
    assert main(["hia", "C[C+](C)C", "--workers", "1"]) == 0
    out = capsys.readouterr().out
    assert "GFN2-xTB" in out and "Keister" in out and "not safety data" in out


def test_ctrl_c_prints_what_finished_and_exits_130(monkeypatch, capsys):
    # the second species to be computed raises KeyboardInterrupt, as Ctrl-C would
    import cationcalc.execution.executors as executors

    real = executors.compute_one
    calls = {"n": 0}

    def flaky(sp, settings):
        calls["n"] += 1
        if calls["n"] == 3:
            raise KeyboardInterrupt
        return real(sp, settings)

    monkeypatch.setattr(executors, "compute_one", flaky)
    code = main(["thermo", "O", "C", "N", "--json", "--workers", "1"])
    records = json.loads(capsys.readouterr().out)
    assert code == 130
    assert [("error" in r) for r in records] == [False, False, True]
    assert "interrupted" in records[2]["error"]
