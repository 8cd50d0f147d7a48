"""Tasks: from one user input to the species it needs and back to a record.

Each task has two halves.  ``prepare`` validates the input and lists the
species to compute (errors become a record with ``error``, so the rest of a
batch still runs); ``finish`` turns computed species results into one flat
record with the keys the command line, JSON and CSV share.  Species shared
between inputs (the reference cation, a common leaving group) are computed
once because :func:`run_task` computes the union of all requests.

Example
-------
>>> from cationcalc.tasks import run_task
>>> from cationcalc.models import Settings
>>> [r["symmetry_number"] for r in run_task("thermo", [("O", "water")], Settings())]
[2]
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

from . import SAFETY_NOTE, units
from .executors import Interrupted, SpeciesFailure, compute_many
from .models import Settings, SpeciesResult
from .properties import heterolysis_energy, hydride_ion_affinity
from .reference import DEFAULT_HIA_REFERENCE, HIAReference, hia_reference
from .species import InputError, Species, carbocation, heterolysis_fragments, hydride_adduct, species

TASKS = ("hia", "heterolysis", "thermo")


class BatchInterrupted(Exception):
    """Ctrl-C during a task; ``records`` has every input (unfinished ones carry an error)."""

    def __init__(self, records: list[dict]):
        super().__init__("interrupted")
        self.records = records


@dataclass
class Prepared:
    """A validated input: the species it needs and how to build its record."""

    base: dict
    needs: dict[str, Species] = field(default_factory=dict)
    error: str | None = None
    finish: Callable[[dict[str, SpeciesResult]], dict] | None = None


def _base(text: str, name: str, settings: Settings) -> dict:
    return {"input": text, "name": name, "method": settings.method, "engine": settings.engine,
            "solvent": settings.solvent or "none", "solvent_model": settings.solvent_model or "none",
            "level": settings.level, "temperature_k": settings.temperature_k}


def _collect_warnings(results: dict[str, SpeciesResult]) -> list[str]:
    seen: list[str] = []
    for r in results.values():
        for w in r.warnings:
            if w not in seen:
                seen.append(w)
    return seen


def _profile(results: dict[str, SpeciesResult]) -> dict:
    grads: dict[str, int] = {}
    for r in results.values():
        for k, v in r.profile.gradients.items():
            grads[k] = grads.get(k, 0) + v
    return {"wall_s": round(sum(r.profile.wall_s for r in results.values()), 3),
            "engine_s": round(sum(r.profile.engine_s for r in results.values()), 3), "gradients": grads}


def prepare_hia(text: str, name: str, settings: Settings, reference: HIAReference, force: bool = False) -> Prepared:
    base = _base(text, name, settings)
    base.update({"reference": reference.name, "reference_hia_kcal_mol": reference.hia_kcal_mol,
                 "reference_source": reference.source})
    try:
        cation = carbocation(text, force=force)
    except InputError as exc:
        return Prepared(base, error=str(exc))
    adduct = hydride_adduct(cation)
    ref_cation = carbocation(reference.cation_smiles)
    needs = {"cation": Species(cation.smiles, 1, 1), "adduct": adduct,
             "reference_cation": Species(ref_cation.smiles, 1, 1), "reference_adduct": hydride_adduct(ref_cation)}
    base.update({"cation_smiles": cation.smiles, "adduct_smiles": adduct.smiles})

    def finish(res: dict[str, SpeciesResult]) -> dict:
        hia = hydride_ion_affinity(res["cation"], res["adduct"], res["reference_cation"], res["reference_adduct"],
                                   reference)
        record = dict(base)
        record.update({
            "hia_kcal_mol": round(hia.hia_kcal_mol, 2),
            "hia_kJ_mol": round(units.kcal_to_kj(hia.hia_kcal_mol), 1),
            "hia_G_kcal_mol": round(hia.hia_G_kcal_mol, 2),
            "hia_G_kJ_mol": round(units.kcal_to_kj(hia.hia_G_kcal_mol), 1),
            **{f"{k.replace('_kcal_mol', '')}_exchange_kcal_mol": round(v, 2)
               for k, v in hia.exchange.as_dict().items()},
            "hia_anchor": "experimental gas-phase HIA of the reference cation"
                          + ("; exchange energy in implicit solvent (relative scale)" if settings.solvent else ""),
            "rearranged": res["cation"].rearranged,
            "relaxed_cation_smiles": res["cation"].relaxed_smiles,
            "cation_point_group": res["cation"].point_group,
            "warnings": _collect_warnings(res),
            "profile": _profile(res),
        })
        if res["cation"].rearranged:
            record["warnings"].insert(0, "the cation is not a minimum at this level: the value is the hydride "
                                         f"abstraction from {adduct.smiles} giving the relaxed structure "
                                         f"({res['cation'].bonding_change})")
        return record

    return Prepared(base, needs, finish=finish)


def prepare_heterolysis(text: str, name: str, settings: Settings, force: bool = False) -> Prepared:
    base = _base(text, name, settings)
    try:
        het = heterolysis_fragments(text, force=force)
    except InputError as exc:
        return Prepared(base, error=str(exc))
    base.update({"substrate_smiles": het.substrate.smiles, "cation_smiles": het.cation.smiles,
                 "leaving_group": het.leaving_group_name, "leaving_group_smiles": het.leaving_group.smiles,
                 "site_atom": het.carbon_index})
    needs = {"substrate": het.substrate, "cation": Species(het.cation.smiles, 1, 1), "leaving_group": het.leaving_group}

    def finish(res: dict[str, SpeciesResult]) -> dict:
        energy = heterolysis_energy(res["substrate"], res["cation"], res["leaving_group"])
        record = dict(base)
        record.update({
            "dE_het_kcal_mol": round(energy.dE_kcal_mol, 2),
            "dZPE_het_kcal_mol": round(energy.dZPE_kcal_mol, 2),
            "dH_het_kcal_mol": round(energy.dH_kcal_mol, 2),
            "minus_TdS_het_kcal_mol": round(energy.minus_TdS_kcal_mol, 2),
            "dG_het_kcal_mol": round(energy.dG_kcal_mol, 2),
            "dH_het_kJ_mol": round(units.kcal_to_kj(energy.dH_kcal_mol), 1),
            "dG_het_kJ_mol": round(units.kcal_to_kj(energy.dG_kcal_mol), 1),
            "standard_state": "1 mol/L (solution)" if settings.solvent else "1 atm (gas)",
            "rearranged": res["cation"].rearranged,
            "relaxed_cation_smiles": res["cation"].relaxed_smiles,
            "warnings": _collect_warnings(res),
            "profile": _profile(res),
        })
        if settings.solvent:
            record["warnings"].append("implicit solvent misses specific solvation of the anion "
                                      "(hydrogen bonds), which matters most for small anions in protic solvents")
        return record

    return Prepared(base, needs, finish=finish)


def prepare_thermo(text: str, name: str, settings: Settings, force: bool = False) -> Prepared:
    base = _base(text, name, settings)
    try:
        sp = species(text, force=force)
    except InputError as exc:
        return Prepared(base, error=str(exc))

    def finish(res: dict[str, SpeciesResult]) -> dict:
        r = res["species"]
        k = units.HARTREE_TO_KCAL_MOL
        record = dict(base)
        record.update({
            "smiles": r.smiles, "charge": r.charge, "multiplicity": r.multiplicity, "formula": r.formula,
            "E_hartree": round(r.E_hartree, 8), "zpe_kcal_mol": round(r.zpe_kcal_mol, 3),
            "H_kcal_mol": round((r.H_hartree - r.E_hartree) * k, 3),
            "G_kcal_mol": round((r.G_hartree - r.E_hartree) * k, 3),
            "H_hartree": round(r.H_hartree, 8), "G_hartree": round(r.G_hartree, 8),
            "S_J_mol_K": round(r.S_J_mol_K, 2),
            "standard_state_correction_kcal_mol": round(r.standard_state_correction_kcal_mol, 3),
            "symmetry_number": r.symmetry_number, "point_group": r.point_group,
            "lowest_frequencies_cm1": [round(f, 1) for f in r.frequencies_cm1[:6]],
            "imaginary_frequencies_cm1": [round(f, 1) for f in r.imaginary_frequencies_cm1],
            "conformers": [{"dE_kcal_mol": round(c.relative_energy_kcal_mol, 2), "weight": round(c.weight, 3),
                            "bonding_changed": c.bonding_changed} for c in r.conformers],
            "rearranged": r.rearranged, "relaxed_smiles": r.relaxed_smiles,
            "warnings": list(r.warnings), "profile": _profile(res),
        })
        return record

    return Prepared(base, {"species": sp}, finish=finish)


def run_task(task: str, items: list[tuple[str, str]], settings: Settings, *, reference: str = DEFAULT_HIA_REFERENCE,
             workers: int = 1, force: bool = False, progress=None) -> list[dict]:
    """Run one task over (input, name) pairs; one record per input, in input order."""
    if task not in TASKS:
        raise ValueError(f"unknown task {task!r}: choose one of {', '.join(TASKS)}")
    prepared = []
    for text, name in items:
        if task == "hia":
            prepared.append(prepare_hia(text, name, settings, hia_reference(reference), force))
        elif task == "heterolysis":
            prepared.append(prepare_heterolysis(text, name, settings, force))
        else:
            prepared.append(prepare_thermo(text, name, settings, force))
    needed = [sp for p in prepared if p.error is None for sp in p.needs.values()]
    interrupted = False
    try:
        results = compute_many(needed, settings, workers=workers, progress=progress)
    except Interrupted as exc:
        results, interrupted = exc.results, True
    records = []
    for p in prepared:
        if p.error is not None:
            records.append({**p.base, "error": p.error, "warnings": [], "rearranged": False})
            continue
        res = {role: results[sp] for role, sp in p.needs.items()}
        failed = [f"{role} {sp.smiles}: {results[sp].message}" for role, sp in p.needs.items()
                  if isinstance(results[sp], SpeciesFailure)]
        if failed:
            records.append({**p.base, "error": "; ".join(failed), "warnings": [], "rearranged": False})
            continue
        records.append(p.finish(res))
    if interrupted:
        raise BatchInterrupted(records)
    return records


__all__ = ["run_task", "TASKS", "SAFETY_NOTE"]
