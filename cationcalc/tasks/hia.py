"""The ``hia`` task: hydride-ion affinity of a carbocation by isodesmic hydride exchange with an anchor cation.

HIA(R⁺) = HIA(anchor, experimental gas phase) + ΔH of R⁺ + anchor–H → R–H + anchor⁺,
computed at the chosen level (:func:`cationcalc.compute.properties.hydride_ion_affinity`).

Example
-------
>>> from cationcalc.tasks.hia import HIA
>>> HIA.name, HIA.headline, HIA.options().reference
('hia', 'hia_kcal_mol', 'tert-butyl')
"""

from __future__ import annotations

from pydantic import field_validator

from cationcalc.chem import units
from cationcalc.chem.reference import DEFAULT_HIA_REFERENCE, HIAReference, hia_reference
from cationcalc.chem.species import InputError, Species, carbocation, hydride_adduct
from cationcalc.compute.models import Settings, SpeciesResult
from cationcalc.compute.properties import hydride_ion_affinity
from cationcalc.execution.refine import refine_task_records
from cationcalc.tasks.records import Prepared, collect_warnings, record_base, species_profile
from cationcalc.tasks.record_types import HiaRecord
from cationcalc.tasks.registry import RefinableOptions, TaskSpec, option, register
from cationcalc.tasks.views import CATION, HIA as HIA_COLUMN, SUBSTRATE, Column, relaxed_label
from cationcalc.trust.uncertainty import annotate


class HiaOptions(RefinableOptions):
    reference: str = option(DEFAULT_HIA_REFERENCE,
                            "anchor cation (name or SMILES from the bundled gas-phase HIA table)")

    @field_validator("reference")
    @classmethod
    def _known_reference(cls, value):
        hia_reference(value)  # raises ValueError naming the known anchors
        return value


def prepare_hia(text: str, name: str, settings: Settings, reference: HIAReference, force: bool = False) -> Prepared:
    base = record_base(text, name, settings)
    base.update({"reference": reference.name, "reference_hia_kcal_mol": reference.hia_kcal_mol,
                 "reference_source": reference.source, "reference_status": reference.status})
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
            "warnings": collect_warnings(res),
            "profile": species_profile(res),
        })
        if res["cation"].rearranged:
            record["warnings"].insert(0, "the cation is not a minimum at this level: the value is the hydride "
                                         f"abstraction from {adduct.smiles} giving the relaxed structure "
                                         f"({res['cation'].bonding_change})")
        return record

    return Prepared(base, needs, finish=finish)


def _prepare(text: str, name: str, settings: Settings, options: dict, force: bool) -> list[Prepared]:
    reference = hia_reference(options.get("reference") or DEFAULT_HIA_REFERENCE)
    return [prepare_hia(text, name, settings, reference, force)]


HIA = register(TaskSpec(
    name="hia", record=HiaRecord,
    help="hydride-ion affinities of carbocations", options=HiaOptions, headline="hia_kcal_mol",
    view=(SUBSTRATE, CATION, HIA_COLUMN,
          Column("hia_G_kcal_mol", "ΔG-HIA (kcal/mol)", "value", "hia_G_uncertainty_kcal_mol"),
          Column("relaxed", "relaxed to", "smiles", get=relaxed_label)),
    wide=(("name", "name"), ("cation_smiles", "cation"), ("hia_kcal_mol", "HIA kcal/mol"),
          ("hia_xtb_kcal_mol", "HIA GFN2-xTB"), ("hia_kJ_mol", "HIA kJ/mol"),
          ("hia_G_kcal_mol", "ΔG-HIA kcal/mol")),
    title="hydride-ion affinity", report_title="hydride-ion affinity",
    prepare=_prepare, refine=refine_task_records, uncertainty=annotate, calibrated=True))


__all__ = ["HIA", "HiaOptions", "prepare_hia"]
