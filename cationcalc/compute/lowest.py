"""The lowest structure of a species found anywhere in a run.

A conformer search can miss a species' minimum, and another computation of
the same run can then find it: a shift product whose every conformer relaxes
back into its parent, below the parent's own best conformer (tert-amyl's
3-methyl-2-butyl product does this at GFN2-xTB).  The parent's values must
then come from that lower structure.  This module is the arithmetic: which
results of a run carry a lower structure of which other species
(:func:`lower_structures`), the geometry in the species' own atom order
(:func:`seed_geometry`), and whether a recomputed result replaces the old
one (:func:`replaces`).  Computing is left to
:mod:`cationcalc.execution.lowest`.

Example
-------
>>> lower_structures({})
{}
>>> replacement_note("[CH2+]C(C)CC", 2.27)
'values from a lower structure found in this run (the optimised [CH2+]C(C)CC relaxed into this species 2.27 kcal/mol below its own best conformer); conformer search recomputed with it'
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
from rdkit import Chem

from cationcalc.chem import units
from cationcalc.chem.bonding import positions_in_atom_order
from cationcalc.chem.species import InputError, Species, carbocation, species
from cationcalc.compute.models import SpeciesResult

#: a structure counts as lower when it is below the species' lowest conformer by more than this
#: (kcal/mol; the pipeline's duplicate-conformer threshold: smaller differences are one minimum)
LOWER_BY_KCAL_MOL = 0.05
#: the words every replaced result carries in its warnings (the start of the note)
LOWER_STRUCTURE_NOTE = "values from a lower structure found in this run"


def replacement_note(source_smiles: str, lower_by_kcal_mol: float) -> str:
    """The short note a species recomputed from a lower structure carries."""
    return (f"{LOWER_STRUCTURE_NOTE} (the optimised {source_smiles} relaxed into this species "
            f"{lower_by_kcal_mol:.2f} kcal/mol below its own best conformer); conformer search recomputed with it")


def structure_energy_hartree(result: SpeciesResult) -> float:
    """Electronic energy of the geometry a result carries (its lowest-G conformer), Hartree."""
    best = [c for c in result.conformers if c.gibbs_kcal_mol == 0.0]
    if not best:
        return result.E_hartree
    return result.E_hartree + best[0].relative_energy_kcal_mol / units.HARTREE_TO_KCAL_MOL


def relaxed_into(result: SpeciesResult) -> Species | None:
    """The species a result's structure is (when every conformer relaxed to a classical structure), else None."""
    if not result.rearranged or not result.relaxed_smiles:
        return None
    try:
        if result.charge == 1:
            smiles = carbocation(result.relaxed_smiles, force=True).smiles
        else:
            smiles = species(result.relaxed_smiles, force=True).smiles
    except InputError:
        return None
    return Species(smiles, result.charge, result.multiplicity)


def lower_structures(results: Mapping[Species, object],
                     lower_by_kcal_mol: float = LOWER_BY_KCAL_MOL) -> dict[Species, list[SpeciesResult]]:
    """Species of ``results`` → results of the run that relaxed into them below their lowest conformer, lowest first.

    Only results computed with the same settings count (the level and the species' charge and
    multiplicity must agree); results that are not a :class:`SpeciesResult` are skipped.
    """
    found: dict[Species, list[SpeciesResult]] = {}
    for source in results.values():
        if not isinstance(source, SpeciesResult):
            continue
        target = relaxed_into(source)
        if target is None or target.smiles == source.smiles:
            continue
        current = results.get(target)
        if not isinstance(current, SpeciesResult) or current.level != source.level:
            continue
        gap = (current.E_hartree - structure_energy_hartree(source)) * units.HARTREE_TO_KCAL_MOL
        if gap > lower_by_kcal_mol:
            found.setdefault(target, []).append(source)
    return {t: sorted(s, key=structure_energy_hartree) for t, s in found.items()}


def seed_geometry(target: Species, source: SpeciesResult) -> np.ndarray | None:
    """The geometry of ``source`` in the atom order of ``target`` (hydrogens explicit), or None if it is not one."""
    mol = Chem.AddHs(Chem.MolFromSmiles(target.smiles))
    return positions_in_atom_order(mol, source.numbers, source.positions_angstrom)


def replaces(old: SpeciesResult, new: SpeciesResult, lower_by_kcal_mol: float = LOWER_BY_KCAL_MOL) -> bool:
    """True when ``new`` (the same species recomputed) is lower than ``old`` and kept its bonding.

    >>> from types import SimpleNamespace as R
    >>> replaces(R(E_hartree=-1.0), R(E_hartree=-1.001, rearranged=False))
    True
    >>> replaces(R(E_hartree=-1.0), R(E_hartree=-1.00001, rearranged=False))
    False
    """
    gap = (old.E_hartree - new.E_hartree) * units.HARTREE_TO_KCAL_MOL
    return gap > lower_by_kcal_mol and not new.rearranged


def with_note(result: SpeciesResult, note: str) -> SpeciesResult:
    """A copy of ``result`` whose warnings start with ``note`` (once)."""
    if note in result.warnings:
        return result
    return result.model_copy(update={"warnings": [note] + list(result.warnings)})


__all__ = ["LOWER_BY_KCAL_MOL", "LOWER_STRUCTURE_NOTE", "lower_structures", "relaxed_into", "replacement_note",
           "replaces", "seed_geometry", "structure_energy_hartree", "with_note"]
