"""Published reference values bundled with the package, each row with its source.

The tables in ``cationcalc/data/`` are copies of compiled literature values
(gas-phase hydride-ion affinities, heterolysis enthalpies, rearrangement
energies, σ⁺ constants, Mayr E, pKR⁺, JANAF entropies), each row carrying a
``source`` (a citation: authors, journal, year, volume, page) and a
``status`` (read, derived, or recalled), with how each was checked in
``verification``.  The hydride
affinities of reference cations anchor the isodesmic hydride exchange.

Example
-------
>>> from cationcalc.chem.reference import hia_reference
>>> ref = hia_reference("tert-butyl")
>>> ref.hia_kcal_mol, ref.cation_smiles
(236.7, 'C[C+](C)C')
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from functools import lru_cache
from importlib import resources

from rdkit import Chem

DEFAULT_HIA_REFERENCE = "tert-butyl"


@lru_cache(maxsize=None)
def load_table(name: str) -> tuple[dict, ...]:
    """Rows of a bundled CSV table (e.g. 'gas_hydride_ion_affinities')."""
    path = resources.files("cationcalc") / "data" / f"{name}.csv"
    with path.open(encoding="utf-8", newline="") as handle:
        return tuple(dict(row) for row in csv.DictReader(handle))


@dataclass(frozen=True)
class HIAReference:
    """A cation whose experimental gas-phase HIA anchors the hydride exchange."""

    name: str
    cation_smiles: str
    adduct_smiles: str
    hia_kcal_mol: float
    temperature_k: float
    source: str
    status: str


def _usable_as_anchor(row: dict) -> bool:
    notes = (row.get("notes") or "").lower() + row["name"].lower()
    return row["T_K"] == "298" and not any(w in notes for w in ("not a minimum", "threshold", "superseded"))


def hia_references() -> list[HIAReference]:
    """Rows of the gas-phase HIA table usable as an anchor (298 K, minima, not superseded)."""
    out = []
    for row in load_table("gas_hydride_ion_affinities"):
        if not _usable_as_anchor(row):
            continue
        name = row["name"].split(" (")[0]
        out.append(HIAReference(name, Chem.CanonSmiles(row["cation_smiles"]), Chem.CanonSmiles(row["adduct_smiles"]),
                                float(row["hia_kcal_mol"]), float(row["T_K"]), row["source"], row["status"]))
    return out


def hia_reference(name_or_smiles: str = DEFAULT_HIA_REFERENCE) -> HIAReference:
    """Look up an anchor cation by name or SMILES; ValueError lists the choices."""
    refs = hia_references()
    key = name_or_smiles.strip()
    canon = Chem.MolFromSmiles(key)
    canon = Chem.MolToSmiles(canon) if canon is not None else None
    for ref in refs:
        if key.lower() == ref.name.lower() or (canon and canon == ref.cation_smiles):
            return ref
    raise ValueError(f"unknown HIA reference {name_or_smiles!r}: choose one of "
                     + ", ".join(r.name for r in refs))
