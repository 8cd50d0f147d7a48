"""Species files of a study: ``.smi``/``.txt`` (SMILES and an optional name per line), ``.csv`` (``smiles``,
``name`` columns) and ``.sdf``, read into (SMILES, name) pairs with errors that name the file and the fix.

Example
-------
>>> import os, tempfile
>>> from pathlib import Path
>>> from cationcalc.studies.species_files import read_species_file
>>> path = Path(tempfile.mkdtemp()) / "cations.smi"
>>> _ = path.write_text("# cations\\nC[C+](C)C tert-butyl\\n[CH2+]c1ccccc1\\n")
>>> read_species_file(path, "auto", "demo")
[('C[C+](C)C', 'tert-butyl'), ('[CH2+]c1ccccc1', '')]
"""

from __future__ import annotations

import csv
import io
from pathlib import Path

from cationcalc.studies.schema import WorkflowError

#: file name endings read as species files (format: auto)
SPECIES_SUFFIXES = {".smi": "smi", ".txt": "smi", ".csv": "csv", ".sdf": "sdf", ".sd": "sdf", ".mol": "sdf"}

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
        fmt = SPECIES_SUFFIXES.get(suffix, "smi")
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


__all__ = ["read_species_file", "SPECIES_SUFFIXES"]
