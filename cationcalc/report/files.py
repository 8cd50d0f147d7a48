"""Study files: results.json/csv, provenance.json, structures.sdf and xyz/*.xyz, written atomically.

Every file carries the provenance of the study: the SHA-256 of the workflow
file (and of its species files), the study name and the versions of
cationcalc and the libraries that determine the numbers.

* ``results.json``: ``{"provenance": {...}, "records": [...]}``, one record
  per species × task × solvent with the keys the command line prints, plus
  ``task``;
* ``results.csv``: the same records; the first line is a ``#`` comment with
  the provenance (read it with ``pandas.read_csv(..., comment="#")``); lists
  are JSON text;
* ``provenance.json``: the full provenance block on its own;
* ``structures.sdf``: every optimised species of the study with its
  properties as SD tags (connectivity as drawn; ``rearranged`` says when the
  geometry relaxed to other bonds);
* ``xyz/*.xyz``: one extended-XYZ file per species, properties in the comment line.

The ``computed`` date range is when the species were computed (from the
store), so re-running an unchanged study rewrites byte-identical files.
Writes are atomic (temporary file in the same folder, then rename); a file
whose content did not change is left untouched.

Example
-------
>>> from cationcalc.report.files import csv_text
>>> print(csv_text([{"name": "tert-butyl", "hia_kcal_mol": 236.7}, {"name": "=cmd", "warnings": ["a"]}]), end="")
name,hia_kcal_mol,warnings
tert-butyl,236.7,
'=cmd,,"[""a""]"
"""

from __future__ import annotations

import io
import json
import math
import os
import platform
import re
import tempfile
from importlib import metadata
from collections.abc import Mapping
from pathlib import Path
from typing import Any, Protocol

from cationcalc.about import SAFETY_NOTE, __version__
from cationcalc.chem import units
from cationcalc.compute.models import SpeciesResult
from cationcalc.execution.store import ResultStore


class StudyPlan(Protocol):
    """What the report reads of a study's plan (cationcalc.studies.plan.Plan; the report sits below studies)."""

    workflow: Any
    loaded: Any
    input_files: Any
    settings: dict
    solvents: list
    tasks: list
    items: list
    output_dir: Path

#: libraries whose versions go into every output (the ones that determine or draw the numbers)
LIBRARIES = ("tblite", "xtb", "rdkit", "ase", "numpy", "scipy", "pydantic", "PyYAML", "matplotlib")


# ---------------------------------------------------------------------------------------------
# provenance and file writing
# ---------------------------------------------------------------------------------------------

def library_versions(engine: str = "tblite") -> dict[str, str]:
    versions = {"cationcalc": __version__, "python": platform.python_version()}
    for name in LIBRARIES:
        if name == "xtb" and engine != "xtb":
            continue
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            if name == "rdkit":
                import rdkit

                versions[name] = rdkit.__version__
            elif name != "xtb":
                versions[name] = "not installed"
    return versions


def provenance(plan: StudyPlan, store: ResultStore) -> dict:
    """The provenance block shared by every output file of a study."""
    created = sorted(store.created(store.touched).values())
    wf = plan.workflow
    return {
        "study": wf.study,
        "description": wf.description,
        "workflow_file": plan.loaded.path.name,
        "workflow_sha256": plan.loaded.sha256,
        "input_files": dict(plan.input_files),
        "versions": library_versions(wf.method.engine),
        "levels": [plan.settings[s].level for s in plan.solvents],
        "settings": {(s or "gas"): plan.settings[s].model_dump(mode="json") for s in plan.solvents},
        "tasks": {t.name: t.options for t in plan.tasks},
        "computed": {"first": created[0] if created else None, "last": created[-1] if created else None},
        "units": "energies in kcal/mol (and kJ/mol where the key says so); E, H, G of species in hartree",
        "safety_note": SAFETY_NOTE,
    }


def short_provenance(prov: dict) -> str:
    versions = " ".join(f"{k}={v}" for k, v in prov["versions"].items())
    return (f"cationcalc study={prov['study']} workflow={prov['workflow_file']} "
            f"workflow_sha256={prov['workflow_sha256']} {versions}")


_UMASK = os.umask(0o022)
os.umask(_UMASK)


def write_atomic(path: Path, data: bytes) -> bool:
    """Write ``data`` to ``path`` atomically; returns False (and leaves the file) when unchanged."""
    path = Path(path)
    try:
        if path.read_bytes() == data:
            return False
    except OSError:
        pass
    path.parent.mkdir(parents=True, exist_ok=True)
    handle, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        os.chmod(tmp, 0o666 & ~_UMASK)  # mkstemp makes 0600; outputs are ordinary files
        with os.fdopen(handle, "wb") as out:
            out.write(data)
            out.flush()
            os.fsync(out.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    return True


def jsonable(value: Any) -> Any:
    """A numpy scalar or array as plain Python (``default=`` of :func:`json.dumps`)."""
    if hasattr(value, "item"):  # numpy scalars
        return value.item()
    if hasattr(value, "tolist"):
        return value.tolist()
    raise TypeError(f"cannot write {type(value).__name__} to JSON")


def finite(value: Any) -> Any:
    """``value`` with every NaN or infinite float replaced by None (JSON has no NaN; a reader would choke)."""
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, Mapping):  # a dict or a typed record
        return {k: finite(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [finite(v) for v in value]
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):  # numpy scalars
        return finite(value.item())
    if hasattr(value, "tolist"):
        return finite(value.tolist())
    return value


def records_json(records: list[dict], prov: dict) -> bytes:
    return (json.dumps(finite({"provenance": prov, "records": records}), indent=2, ensure_ascii=False,
                       default=jsonable, allow_nan=False) + "\n").encode()


_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def spreadsheet_safe(value: Any) -> Any:
    """A text cell a spreadsheet would run as a formula (=, +, -, @ first) gets a leading single quote.

    Numbers, and text that reads as a plain number (-1.5), are left alone.  Common practice, no source.
    """
    if not isinstance(value, str) or not value.startswith(_FORMULA_START):
        return value
    try:
        float(value)
        return value
    except ValueError:
        return "'" + value


def one_line(text: str, limit: int | None = None) -> str:
    """``text`` without line breaks or control characters (an SDF title or XYZ comment is one line)."""
    flat = re.sub(r"[\x00-\x1f\x7f\x85\u2028\u2029]+", " ", str(text)).strip()
    flat = flat.replace("$$$$", "$ $ $ $")  # the SDF record separator
    if limit is not None and len(flat) > limit:
        flat = flat[: limit - 1] + "…"
    return flat


def csv_text(records: list[dict], comment: str | None = None) -> str:
    """Records as CSV: one column per key seen (in order), lists and dicts as JSON, optional # comment line."""
    import csv

    keys: list[str] = []
    for r in records:
        for k in r:
            if k not in keys:
                keys.append(k)
    buffer = io.StringIO()
    if comment is not None:
        buffer.write(f"# {comment}\n")
    writer = csv.DictWriter(buffer, fieldnames=keys, extrasaction="ignore", lineterminator="\n")
    writer.writeheader()
    for r in records:
        writer.writerow({k: spreadsheet_safe(json.dumps(finite(v), ensure_ascii=False, default=jsonable)
                                             if isinstance(v, (list, dict)) else v)
                         for k, v in r.items()})
    return buffer.getvalue()


def records_csv(records: list[dict], prov: dict) -> bytes:
    return csv_text(records, short_provenance(prov)).encode()


# ---------------------------------------------------------------------------------------------
# structures
# ---------------------------------------------------------------------------------------------

def names_by_smiles(records: list[dict]) -> dict[str, list[str]]:
    """Which study inputs a species belongs to (by canonical SMILES), for titles."""
    roles = {"cation_smiles": "cation", "adduct_smiles": "hydride adduct", "substrate_smiles": "substrate",
             "leaving_group_smiles": "leaving group", "smiles": ""}
    names: dict[str, list[str]] = {}
    for r in records:
        label = r.get("name") or r.get("input") or ""
        for key, role in roles.items():
            smi = r.get(key)
            if isinstance(smi, str) and smi:
                text = f"{label} ({role})" if role else label
                if text and text not in names.setdefault(smi, []):
                    names[smi].append(text)
    return names


def study_species(store: ResultStore) -> list[SpeciesResult]:
    """Every stored species this run used, in a fixed order (level, formula, SMILES)."""
    results = list(store.results(store.touched))
    return sorted(results, key=lambda r: (r.solvent or "", r.formula, r.smiles, r.charge, r.multiplicity, r.key))


def _molecule(result: SpeciesResult):
    """RDKit molecule with the optimised geometry (atom order of the result), or None."""
    from rdkit import Chem
    from rdkit.Geometry import Point3D

    mol = Chem.AddHs(Chem.MolFromSmiles(result.smiles))
    if [a.GetAtomicNum() for a in mol.GetAtoms()] != list(result.numbers):
        return None
    conf = Chem.Conformer(mol.GetNumAtoms())
    for i, (x, y, z) in enumerate(result.positions_angstrom):
        conf.SetAtomPosition(i, Point3D(x, y, z))
    conf.Set3D(True)
    mol.RemoveAllConformers()
    mol.AddConformer(conf, assignId=True)
    return mol


def _species_tags(r: SpeciesResult) -> dict[str, str]:
    k = units.HARTREE_TO_KCAL_MOL
    return {
        "smiles": r.smiles, "charge": str(r.charge), "multiplicity": str(r.multiplicity), "formula": r.formula,
        "level": r.level, "temperature_k": f"{r.temperature_k}",
        "E_hartree": f"{r.E_hartree:.8f}", "H_hartree": f"{r.H_hartree:.8f}", "G_hartree": f"{r.G_hartree:.8f}",
        "zpe_kcal_mol": f"{r.zpe_kcal_mol:.3f}", "H_minus_E_kcal_mol": f"{(r.H_hartree - r.E_hartree) * k:.3f}",
        "G_minus_E_kcal_mol": f"{(r.G_hartree - r.E_hartree) * k:.3f}", "S_J_mol_K": f"{r.S_J_mol_K:.2f}",
        "point_group": r.point_group, "symmetry_number": str(r.symmetry_number),
        "imaginary_frequencies_cm1": " ".join(f"{f:.1f}" for f in r.imaginary_frequencies_cm1) or "none",
        "lowest_frequencies_cm1": " ".join(f"{f:.1f}" for f in r.frequencies_cm1[:6]),
        "partial_charges": " ".join(f"{q:.4f}" for q in r.partial_charges),
        "rearranged": "yes" if r.rearranged else "no",
        "relaxed_smiles": r.relaxed_smiles or "", "bonding_change": r.bonding_change,
        "warnings": " | ".join(r.warnings), "species_key": r.key,
    }


def structures_sdf(results: list[SpeciesResult], names: dict[str, list[str]], prov: dict) -> bytes:
    from rdkit import Chem

    buffer = io.StringIO()
    writer = Chem.SDWriter(buffer)
    for r in results:
        mol = _molecule(r)
        if mol is None:
            continue
        title = one_line("; ".join(names.get(r.smiles, [])) or r.smiles, limit=60)
        mol.SetProp("_Name", f"{title} [{r.level}]")
        for key, value in _species_tags(r).items():
            mol.SetProp(key, value)
        mol.SetProp("study", prov["study"])
        mol.SetProp("workflow_sha256", prov["workflow_sha256"])
        mol.SetProp("versions", " ".join(f"{k}={v}" for k, v in prov["versions"].items()))
        writer.write(mol)
    writer.close()
    return buffer.getvalue().encode()


def _safe(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", text).strip("_") or "species"


def xyz_files(results: list[SpeciesResult], names: dict[str, list[str]], prov: dict) -> dict[str, bytes]:
    """File name → extended-XYZ text for each species."""
    from ase.data import chemical_symbols

    out: dict[str, bytes] = {}
    for r in results:
        sign = f"q{r.charge:+d}" if r.charge else "q0"
        fname = f"{_safe(r.formula)}_{sign}_{_safe(r.solvent or 'gas')}_{r.key[:8]}.xyz"
        fields = {
            "name": one_line("; ".join(names.get(r.smiles, [])) or r.smiles), "smiles": r.smiles, "charge": r.charge,
            "multiplicity": r.multiplicity, "level": r.level, "E_hartree": f"{r.E_hartree:.8f}",
            "G_hartree": f"{r.G_hartree:.8f}", "study": prov["study"], "workflow_sha256": prov["workflow_sha256"],
            **{k: v for k, v in prov["versions"].items()},
        }
        comment = " ".join(f'{k}="{one_line(v).replace(chr(34), chr(39))}"' for k, v in fields.items())
        lines = [str(len(r.numbers)), comment]
        for z, (x, y, zz) in zip(r.numbers, r.positions_angstrom):
            lines.append(f"{chemical_symbols[z]:<2} {x:14.8f} {y:14.8f} {zz:14.8f}")
        out[fname] = ("\n".join(lines) + "\n").encode()
    return out


def read_results(path: str | os.PathLike) -> dict:
    """``results.json`` of a study: ``{"provenance": ..., "records": [...]}``."""
    return json.loads(Path(path).read_text(encoding="utf-8"))


__all__ = ["library_versions", "provenance", "short_provenance", "write_atomic", "jsonable", "finite",
           "records_json", "spreadsheet_safe", "one_line", "csv_text", "records_csv", "names_by_smiles",
           "study_species", "structures_sdf", "xyz_files", "read_results", "LIBRARIES"]
