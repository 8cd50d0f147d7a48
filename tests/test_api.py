"""The notebook API (cationcalc.hia, …): the command line's records, options, defaults and errors."""

from __future__ import annotations

import json
import pathlib
import re
import subprocess
import sys
from collections.abc import Mapping

import pytest

import cationcalc
from cationcalc.api import Records
from cationcalc.cli.main import main
from cationcalc.report.outputs import finite

ROOT = pathlib.Path(__file__).resolve().parent.parent


def _cli_json(argv: list[str], capsys) -> list[dict]:
    assert main(argv + ["--json"]) == 0
    return json.loads(capsys.readouterr().out)


def _as_json(records: Records) -> list[dict]:
    return json.loads(json.dumps(finite([dict(r) for r in records])))


def test_the_package_top_loads_the_api_only_when_asked():
    code = ("import sys, cationcalc.chem.units\n"
            "print(sorted(m for m in sys.modules if m.startswith(('cationcalc.api', 'cationcalc.engines', "
            "'cationcalc.compute', 'tblite', 'rdkit', 'pandas'))))\n"
            "import cationcalc\nprint(cationcalc.hia.__module__)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                         cwd=ROOT).stdout.split("\n")
    assert out[0] == "[]"
    assert out[1] == "cationcalc.api"
    with pytest.raises(AttributeError, match="no attribute 'hai'"):
        cationcalc.hai  # noqa: B018


def test_hia_gives_the_records_of_the_command_line(capsys):
    records = cationcalc.hia("C[C+](C)C", workers=1)
    assert isinstance(records, Records) and records.task == "hia"
    assert _as_json(records) == _cli_json(["hia", "C[C+](C)C", "--workers", "1"], capsys)


def test_options_in_chemists_words_are_the_command_line_options(capsys):
    records = cationcalc.thermo([("CC(O)CC", "2-butanol")], solvent="water", temperature=350.0, conformers=2,
                                rrho=True, mix_enantiomers=True, pressure=100000.0, workers=1)
    cli = _cli_json(["thermo", "CC(O)CC", "--solvent", "water", "--temperature", "350", "--conformers", "2",
                     "--rrho", "--mix-enantiomers", "--pressure", "100000", "--workers", "1"], capsys)
    assert records[0]["name"] == "2-butanol"
    assert _as_json(records) == [{**cli[0], "name": "2-butanol"}]
    assert records[0]["temperature_k"] == 350.0 and records[0]["solvent"] == "water"


def test_one_smiles_a_list_and_named_pairs_are_inputs():
    assert [r["input"] for r in cationcalc.thermo("O", workers=1)] == ["O"]
    records = cationcalc.thermo(["O", ("[Cl-]", "chloride")], workers=1)
    assert [(r["input"], r["name"]) for r in records] == [("O", ""), ("[Cl-]", "chloride")]
    with pytest.raises(TypeError, match="neither a SMILES text nor a"):
        cationcalc.thermo([("O", "water", "extra")])
    with pytest.raises(ValueError, match="no inputs"):
        cationcalc.thermo([])


def test_a_store_path_is_written_then_read(tmp_path, monkeypatch):
    from cationcalc.execution import executors
    from cationcalc.execution.store import ResultStore

    path = tmp_path / "store.sqlite"
    first = cationcalc.thermo("O", store=path, workers=1)
    with ResultStore(path) as store:
        assert len(store) == 1
    computed = []
    real = executors.compute_one
    monkeypatch.setattr(executors, "compute_one", lambda sp, settings: computed.append(sp) or real(sp, settings))
    again = cationcalc.thermo("O", store=str(path), workers=1)
    assert computed == []
    assert _as_json(again) == _as_json(first)


def test_profile_is_kept_only_when_asked():
    assert "profile" not in cationcalc.thermo("O", workers=1)[0]
    assert "wall_s" in cationcalc.thermo("O", workers=1, profile=True)[0]["profile"]


@pytest.mark.parametrize("call, argv", [
    (lambda: cationcalc.hia("C[C+](C)C", solvent="watr"), ["hia", "C[C+](C)C", "--solvent", "watr"]),
    (lambda: cationcalc.hia("C[C+](C)C", reference="no-such-cation"),
     ["hia", "C[C+](C)C", "--reference", "no-such-cation"]),
    (lambda: cationcalc.rate("CC(C)(C)Cl", medium="90% glycerol"), ["rate", "CC(C)(C)Cl", "--medium", "90% glycerol"]),
    (lambda: cationcalc.rate("CC(C)(C)Cl", medium="water", temperature=500.0),
     ["rate", "CC(C)(C)Cl", "--medium", "water", "--temperature", "500"]),
    (lambda: cationcalc.ionize("CC(C)(C)Cl", leaving_group="unobtainium"),
     ["ionize", "CC(C)(C)Cl", "--leaving-group", "unobtainium"]),
    (lambda: cationcalc.ladder("CC(*)c1ccccc1", groups=["chloride", "unobtainium"]),
     ["ladder", "CC(*)c1ccccc1", "--groups", "chloride,unobtainium"]),
    (lambda: cationcalc.hia("C[C+](C)C", refine="HF/no-such-basis"),
     ["hia", "C[C+](C)C", "--refine=HF/no-such-basis"]),
])
def test_bad_input_raises_the_command_lines_one_line_error(call, argv, capsys):
    assert main(argv) == 2
    cli_message = capsys.readouterr().err.strip()
    with pytest.raises(ValueError) as caught:
        call()
    assert cli_message == f"cationcalc: error: {caught.value}"
    assert "\n" not in str(caught.value)


def test_out_of_range_numbers_raise_one_line_errors():
    with pytest.raises(ValueError, match=r"^temperature 10000.0 K is outside 50-3000 K"):
        cationcalc.thermo("O", temperature=10000.0)
    with pytest.raises(ValueError, match=r"^pressure 0.0 Pa is outside"):
        cationcalc.thermo("O", pressure=0.0)
    with pytest.raises(ValueError, match=r"^workers: 0 is below 1; give 1 or more$"):
        cationcalc.thermo("O", workers=0)
    with pytest.raises(ValueError, match=r"^conformers: 0 is below 1"):
        cationcalc.thermo("O", conformers=0)


class _Record(Mapping):
    """A read-only record, as typed records may be."""

    def __init__(self, **values):
        self._values = values

    def __getitem__(self, key):
        return self._values[key]

    def __iter__(self):
        return iter(self._values)

    def __len__(self):
        return len(self._values)


def test_to_frame_has_one_column_per_key_in_first_seen_order():
    records = Records([{"input": "a", "hia_kcal_mol": 230.1, "warnings": []},
                       _Record(input="b", error="bad SMILES", warnings=["x"])], task="hia")
    frame = records.to_frame()
    assert list(frame.columns) == ["input", "hia_kcal_mol", "warnings", "error"]
    assert frame["input"].tolist() == ["a", "b"]
    assert frame["warnings"].tolist() == [[], ["x"]]
    assert frame["hia_kcal_mol"].isna().tolist() == [False, True]


def test_to_frame_without_pandas_names_the_extra(monkeypatch):
    monkeypatch.setitem(sys.modules, "pandas", None)
    with pytest.raises(ImportError, match=re.escape("pip install 'cationcalc[frame]'")):
        Records([{"input": "a"}]).to_frame()


def _python_blocks(text: str) -> list[str]:
    return re.findall(r"^```python\n(.*?)^```", text, re.MULTILINE | re.DOTALL)


def test_the_readme_python_examples_run(tmp_path, monkeypatch):
    blocks = _python_blocks((ROOT / "README.md").read_text(encoding="utf-8"))
    assert blocks, "README.md has no ```python block"
    monkeypatch.chdir(tmp_path)
    for block in blocks:
        exec(compile(block, "README.md", "exec"), {"__name__": "__readme__"})
