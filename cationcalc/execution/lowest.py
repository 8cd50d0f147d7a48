"""Recompute the species of a run for which another computation found a lower structure.

:func:`settle_lowest` looks through a run's results for structures that
relaxed into another species of the run below that species' lowest conformer
(:func:`cationcalc.compute.lowest.lower_structures`), recomputes each such
species with the lower structure added to its conformer search (the same
protocol and settings, so the ensemble, H and G come from the lowest
structure and its neighbours) and keeps the recomputed result when it is
lower.  The kept result carries a short note in its warnings and replaces
the stored one (:meth:`~cationcalc.execution.store.ResultStore.put_lower`),
so the store holds the lowest result of every species.

Example
-------
>>> from cationcalc.compute.models import Settings
>>> settle_lowest({}, Settings())
{}
"""

from __future__ import annotations

from collections.abc import Mapping

from cationcalc.chem import units
from cationcalc.chem.species import Species
from cationcalc.compute.lowest import (lower_structures, replacement_note, replaces, seed_geometry,
                                       structure_energy_hartree, with_note)
from cationcalc.compute.models import Settings, SpeciesResult
from cationcalc.execution.executors import compute_one
from cationcalc.execution.store import ResultStore, StoreError


def settle_lowest(results: Mapping[Species, object], settings: Settings, *, store: ResultStore | None = None,
                  tried: set | None = None) -> dict[Species, SpeciesResult]:
    """Species of ``results`` recomputed from a lower structure found in the run: species → new result.

    Empty when no result of the run relaxed into another species below that species' lowest
    conformer (the usual case: nothing is computed then).  The new results are stored in place of
    the old ones when a ``store`` is given.  ``tried`` (kept by the caller between calls) holds the
    (species, source key) pairs already tried, so a structure that did not help is not tried again.
    """
    replaced: dict[Species, SpeciesResult] = {}
    tried = set() if tried is None else tried
    for target, sources in lower_structures(results).items():
        old = results[target]
        sources = [s for s in sources if (target, s.key) not in tried]
        tried.update((target, s.key) for s in sources)
        seeds = [g for g in (seed_geometry(target, s) for s in sources) if g is not None]
        if not seeds:
            continue
        new = compute_one(target, settings, seeds=seeds)
        if not isinstance(new, SpeciesResult) or not replaces(old, new):
            continue
        gap = (old.E_hartree - structure_energy_hartree(sources[0])) * units.HARTREE_TO_KCAL_MOL
        new = with_note(new, replacement_note(sources[0].smiles, gap))
        replaced[target] = new
        if store is not None and store.write_error is None:
            try:
                store.put_lower(new, settings)
            except StoreError:
                pass  # kept in memory; store.write_error says nothing was written
    return replaced


__all__ = ["settle_lowest"]
