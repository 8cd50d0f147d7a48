"""The ``heterolysis`` task: R–X → R⁺ + X⁻ energies (ΔE, ΔH, −TΔS, ΔG) of a substrate with a leaving group.

Example
-------
>>> from cationcalc.tasks.heterolysis import HETEROLYSIS
>>> HETEROLYSIS.name, HETEROLYSIS.headline
('heterolysis', 'dG_het_kcal_mol')
"""

from __future__ import annotations

from cationcalc.chem import units
from cationcalc.chem.species import InputError, Species, heterolysis_fragments
from cationcalc.compute.models import Settings, SpeciesResult
from cationcalc.compute.properties import heterolysis_energy
from cationcalc.execution.refine import refine_task_records
from cationcalc.tasks.records import Prepared, collect_warnings, record_base, species_profile
from cationcalc.tasks.record_types import HeterolysisRecord
from cationcalc.tasks.registry import RefinableOptions, TaskSpec, register
from cationcalc.tasks.views import SUBSTRATE, Column
from cationcalc.trust.uncertainty import annotate


def prepare_heterolysis(text: str, name: str, settings: Settings, force: bool = False) -> Prepared:
    base = record_base(text, name, settings)
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
            "warnings": collect_warnings(res),
            "profile": species_profile(res),
        })
        if settings.solvent:
            record["warnings"].append("implicit solvent misses specific solvation of the anion "
                                      "(hydrogen bonds), which matters most for small anions in protic solvents")
        return record

    return Prepared(base, needs, finish=finish)


def _prepare(text: str, name: str, settings: Settings, options: dict, force: bool) -> list[Prepared]:
    return [prepare_heterolysis(text, name, settings, force)]


HETEROLYSIS = register(TaskSpec(
    name="heterolysis", record=HeterolysisRecord,
    help="R–X → R⁺ + X⁻ energies for alkyl halides", options=RefinableOptions,
    headline="dG_het_kcal_mol",
    view=(SUBSTRATE, Column("leaving_group", "leaving group"),
          Column("dG_het_kcal_mol", "ΔG_het (kcal/mol)", "value", "dG_het_uncertainty_kcal_mol"),
          Column("dH_het_kcal_mol", "ΔH_het (kcal/mol)", "value", "dH_het_uncertainty_kcal_mol")),
    wide=(("name", "name"), ("substrate_smiles", "substrate"), ("leaving_group", "X"),
          ("dE_het_kcal_mol", "ΔE"), ("dH_het_kcal_mol", "ΔH"), ("dG_het_kcal_mol", "ΔG kcal/mol"),
          ("dG_het_xtb_kcal_mol", "ΔG GFN2-xTB"), ("dG_het_kJ_mol", "ΔG kJ/mol")),
    title="heterolysis R–X → R⁺ + X⁻", report_title="heterolysis R–X → R⁺ + X⁻",
    prepare=_prepare, refine=refine_task_records, uncertainty=annotate))


__all__ = ["HETEROLYSIS", "prepare_heterolysis"]
