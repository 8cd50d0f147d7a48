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

#: the anchor of GFN2-xTB hydride exchanges (the calibration, its class offsets and the electrofugality line
#: are fitted on it)
DEFAULT_HIA_REFERENCE = "tert-butyl"
#: the ``reference`` of the hia task that picks the anchor by the cation's class (:func:`class_anchor`)
NEAREST_CLASS = "nearest class"
#: anchors by cation class (a :func:`cationcalc.chem.ionization.cation_class` prefix), in order of preference;
#: a cation is never its own anchor, and a class not listed keeps tert-butyl.  Measured with
#: benchmarks/class_anchors.py on the bundled gas-phase set at wB97X-D3BJ/def2-TZVP//GFN2-xTB: an acylium ion
#: anchored on an acylium ion cancels the functional's acylium error (HCO+ +8.7 -> +2.2, acetyl +6.5 -> -2.2
#: kcal/mol; CCSD(T)/def2-TZVP puts both within 0.5 of experiment relative to 2-propyl,
#: benchmarks/coupled_cluster_check.py); allyl/benzyl on each other change by 0.3 at most and CF3 on acetyl gets
#: worse (+2.2 -> -4.3), so they stay on tert-butyl.
CLASS_ANCHORS: dict[str, tuple[str, ...]] = {"acylium": ("acetyl", "formyl HCO+")}


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
    for ref in refs:
        if key.lower() == ref.name.lower():
            return ref
    canon = Chem.MolFromSmiles(key) if "+" in key else None  # an anchor's SMILES is a cation's
    canon = Chem.MolToSmiles(canon) if canon is not None else None
    for ref in refs:
        if canon and canon == ref.cation_smiles:
            return ref
    raise ValueError(f"unknown HIA reference {name_or_smiles!r}: choose one of "
                     + ", ".join(r.name for r in refs) + f" or {NEAREST_CLASS!r}")


def class_anchor_rule() -> str:
    """:data:`CLASS_ANCHORS` in words.

    >>> class_anchor_rule()
    'acylium ions on acetyl, the rest on tert-butyl'
    """
    parts = [f"{prefix} ions on {names[0]}" for prefix, names in CLASS_ANCHORS.items()]
    return ", ".join(parts + [f"the rest on {DEFAULT_HIA_REFERENCE}"])


def given_hia_reference(value: str | None) -> HIAReference | None:
    """The anchor ``value`` names; None for :data:`NEAREST_CLASS` (or nothing); ValueError listing the choices."""
    text = str(value or NEAREST_CLASS).strip()
    return None if text.lower() == NEAREST_CLASS else hia_reference(text)


def check_hia_reference(value: str) -> str:
    """``value`` if it names an anchor or is :data:`NEAREST_CLASS`; ValueError listing the choices otherwise."""
    given_hia_reference(value)
    return value


def class_anchor(cation_smiles: str, cation_class: str) -> HIAReference:
    """The anchor of a cation of class ``cation_class`` under :data:`CLASS_ANCHORS` (tert-butyl otherwise).

    >>> class_anchor("O=[C+]c1ccccc1", "acylium").name, class_anchor("C[C+]=O", "acylium").name
    ('acetyl', 'formyl HCO+')
    >>> class_anchor("[CH2+]c1ccccc1", "benzylic (primary)").name
    'tert-butyl'
    """
    from cationcalc.chem.species import carbocation

    same = carbocation(cation_smiles).smiles  # one resonance form for every writing (CC#[O+], C[C+]=O)
    for prefix, names in CLASS_ANCHORS.items():
        if (cation_class or "").lower().startswith(prefix):
            for name in names:
                ref = hia_reference(name)
                if carbocation(ref.cation_smiles).smiles != same:
                    return ref
    return hia_reference(DEFAULT_HIA_REFERENCE)
