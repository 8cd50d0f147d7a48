"""The ``thermo`` task: energy, ZPE, H, S, G, symmetry and frequencies of any species.

Example
-------
>>> from cationcalc.tasks.thermo import THERMO
>>> THERMO.name, [c.key for c in THERMO.view][:2]
('thermo', ['smiles', 'G_kcal_mol'])
"""

from __future__ import annotations

from cationcalc.chem import units
from cationcalc.chem.species import InputError, species
from cationcalc.compute.models import Settings, SpeciesResult
from cationcalc.execution.refine import refine_task_records
from cationcalc.tasks.records import Prepared, record_base, species_profile
from cationcalc.tasks.record_types import ThermoRecord
from cationcalc.tasks.registry import RefinableOptions, TaskSpec, register
from cationcalc.tasks.views import Column
from cationcalc.trust.uncertainty import annotate


def prepare_thermo(text: str, name: str, settings: Settings, force: bool = False) -> Prepared:
    base = record_base(text, name, settings)
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
            "warnings": list(r.warnings), "profile": species_profile(res),
        })
        return record

    return Prepared(base, {"species": sp}, finish=finish)


def _prepare(text: str, name: str, settings: Settings, options: dict, force: bool) -> list[Prepared]:
    return [prepare_thermo(text, name, settings, force)]


THERMO = register(TaskSpec(
    name="thermo", record=ThermoRecord,
    help="energy, ZPE, H, S, G, symmetry and frequencies of any species", options=RefinableOptions,
    headline=None,
    view=(Column("smiles", "species", "smiles"), Column("G_kcal_mol", "G − E (kcal/mol)", "value", digits=2),
          Column("S_J_mol_K", "S (J/mol/K)", "value"), Column("point_group", "point group")),
    wide=(("smiles", "species"), ("E_hartree", "E/Eh"), ("zpe_kcal_mol", "ZPE kcal/mol"),
          ("H_kcal_mol", "H−E kcal/mol"), ("S_J_mol_K", "S J/mol/K"), ("G_kcal_mol", "G−E kcal/mol"),
          ("point_group", "group"), ("symmetry_number", "σ"), ("imaginary_frequencies_cm1", "imag. cm⁻¹")),
    title="thermochemistry", report_title="thermochemistry",
    prepare=_prepare, refine=refine_task_records, uncertainty=annotate))


__all__ = ["THERMO", "prepare_thermo"]
