"""The ``hia`` task: hydride-ion affinity of a carbocation by isodesmic hydride exchange with an anchor cation.

HIA(R⁺) = HIA(anchor, experimental gas phase) + ΔH of R⁺ + anchor–H → R–H + anchor⁺,
computed at the chosen level (:func:`cationcalc.compute.properties.hydride_ion_affinity`).

The anchor by default is the nearest class's (``reference: nearest class``):
GFN2-xTB values are anchored on tert-butyl, on which the calibration and its
class offsets are fitted (the offsets are GFN2-xTB's class anchor, fitted on
every member of a class instead of one); DFT-refined values, which are not
calibrated, are anchored on :func:`cationcalc.chem.reference.class_anchor`
(acylium ions on acetyl, the rest on tert-butyl).  Every record names the
anchor its value used (``reference``) and how it was chosen
(``reference_choice``).

Example
-------
>>> from cationcalc.tasks.hia import HIA
>>> HIA.name, HIA.headline, HIA.options().reference
('hia', 'hia_kcal_mol', 'nearest class')
"""

from __future__ import annotations

from pydantic import field_validator

from cationcalc.chem import units
from cationcalc.chem.ionization import cation_class
from cationcalc.chem.reference import (DEFAULT_HIA_REFERENCE, NEAREST_CLASS, HIAReference, check_hia_reference,
                                       class_anchor, class_anchor_rule, given_hia_reference, hia_reference)
from cationcalc.chem.species import InputError, Species, carbocation, hydride_adduct
from cationcalc.compute.models import Settings, SpeciesResult
from cationcalc.compute.properties import hydride_ion_affinity
from cationcalc.execution.refine import is_refined, refine_task_records
from cationcalc.tasks.records import Prepared, collect_warnings, record_base, species_profile
from cationcalc.tasks.record_types import HiaRecord
from cationcalc.tasks.registry import RefinableOptions, TaskSpec, option, register
from cationcalc.tasks.views import CATION, HIA as HIA_COLUMN, SUBSTRATE, Column, relaxed_label
from cationcalc.trust.uncertainty import annotate


class HiaOptions(RefinableOptions):
    reference: str = option(NEAREST_CLASS,
                            "anchor cation (name or SMILES from the bundled gas-phase HIA table), or "
                            f"'{NEAREST_CLASS}': tert-butyl for GFN2-xTB values (the calibration is fitted on it), "
                            f"the class anchor for DFT-refined ones ({class_anchor_rule()})")

    @field_validator("reference")
    @classmethod
    def _known_reference(cls, value):
        return check_hia_reference(value)  # raises ValueError naming the known anchors


def _anchor_fields(reference: HIAReference, choice: str) -> dict:
    return {"reference": reference.name, "reference_hia_kcal_mol": reference.hia_kcal_mol,
            "reference_source": reference.source, "reference_status": reference.status, "reference_choice": choice}


def _anchor_needs(reference: HIAReference, prefix: str) -> dict[str, Species]:
    ref_cation = carbocation(reference.cation_smiles)
    return {f"{prefix}_cation": Species(ref_cation.smiles, 1, 1), f"{prefix}_adduct": hydride_adduct(ref_cation)}


def prepare_hia(text: str, name: str, settings: Settings, reference: HIAReference | None, force: bool = False,
                refine: bool = False) -> Prepared:
    """The request of one cation; ``reference`` None picks the nearest-class anchor (see the module notes),
    whose species are asked for only when the values will be ``refine``-d."""
    choice = "given" if reference is not None else NEAREST_CLASS
    screening_anchor = reference or hia_reference(DEFAULT_HIA_REFERENCE)
    base = record_base(text, name, settings)
    base.update(_anchor_fields(screening_anchor, choice))
    try:
        cation = carbocation(text, force=force)
    except InputError as exc:
        return Prepared(base, error=str(exc))
    adduct = hydride_adduct(cation)
    refined_anchor = screening_anchor if reference is not None else class_anchor(cation.smiles, cation_class(cation))
    needs = {"cation": Species(cation.smiles, 1, 1), "adduct": adduct, **_anchor_needs(screening_anchor, "reference")}
    if refine and refined_anchor != screening_anchor:
        needs.update(_anchor_needs(refined_anchor, "class_anchor"))
    base.update({"cation_smiles": cation.smiles, "adduct_smiles": adduct.smiles})

    def finish(res: dict[str, SpeciesResult]) -> dict:
        prefix, anchor = "reference", screening_anchor
        if "class_anchor_cation" in res and is_refined(res["cation"]):
            prefix, anchor = "class_anchor", refined_anchor
        hia = hydride_ion_affinity(res["cation"], res["adduct"], res[f"{prefix}_cation"], res[f"{prefix}_adduct"],
                                   anchor)
        record = dict(base)
        record.update(_anchor_fields(anchor, choice))
        record.update({
            "hia_kcal_mol": round(hia.hia_kcal_mol, 2),
            "hia_kJ_mol": round(units.kcal_to_kj(hia.hia_kcal_mol), 1),
            "hia_G_kcal_mol": round(hia.hia_G_kcal_mol, 2),
            "hia_G_kJ_mol": round(units.kcal_to_kj(hia.hia_G_kcal_mol), 1),
            **{f"{k.replace('_kcal_mol', '')}_exchange_kcal_mol": round(v, 2)
               for k, v in hia.exchange.as_dict().items()},
            "hia_anchor": "experimental gas-phase HIA of the reference cation"
                          + ("; exchange energy in implicit solvent (relative scale)" if settings.solvent else "")
                          + (f"; the GFN2-xTB value beside it is anchored on {screening_anchor.name}"
                             if anchor is not screening_anchor else ""),
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
    reference = given_hia_reference(options.get("reference"))
    return [prepare_hia(text, name, settings, reference, force, refine=bool(options.get("refine")))]


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
