"""Tasks: from one user input to the species it needs and back to a record.

Each task has two halves.  ``prepare`` validates the input and lists the
species to compute (errors become a record with ``error``, so the rest of a
batch still runs); ``finish`` turns computed species results into one flat
record with the keys the command line, JSON and CSV share.  Species shared
between inputs (the reference cation, a common leaving group) are computed
once because :func:`run_task` computes the union of all requests.

Example
-------
>>> from cationcalc.tasks.runner import run_task
>>> from cationcalc.compute.models import Settings
>>> [r["symmetry_number"] for r in run_task("thermo", [("O", "water")], Settings())]
[2]
"""

from __future__ import annotations

from cationcalc.about import SAFETY_NOTE
from cationcalc.chem import units
from cationcalc.execution.executors import Interrupted, SpeciesFailure, compute_many
from cationcalc.compute.models import Settings, SpeciesResult
from cationcalc.compute.properties import heterolysis_energy, hydride_ion_affinity
from cationcalc.chem.reference import DEFAULT_HIA_REFERENCE, HIAReference, hia_reference
from cationcalc.chem.species import InputError, Species, carbocation, heterolysis_fragments, hydride_adduct, species
from cationcalc.tasks.ionization import attach_shifts, collate, prepare_ionize, prepare_ladder, prepare_sites
from cationcalc.tasks.records import BatchInterrupted, Prepared, collect_warnings, record_base, species_profile
from cationcalc.tasks.record_types import Record, typed_records

TASKS = ("hia", "heterolysis", "thermo", "ionize", "sites", "ladder", "rate")



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


def prepare(task: str, text: str, name: str, settings: Settings, options: dict, force: bool) -> list[Prepared]:
    """Validate one input of a task: the prepared requests (one, or one per site/leaving group)."""
    if task == "hia":
        return [prepare_hia(text, name, settings, hia_reference(options.get("reference", DEFAULT_HIA_REFERENCE)),
                            force)]
    if task == "heterolysis":
        return [prepare_heterolysis(text, name, settings, force)]
    if task == "thermo":
        return [prepare_thermo(text, name, settings, force)]
    if task == "ionize":
        return prepare_ionize(text, name, settings, leaving_group=options.get("leaving_group", "auto"),
                              acid=options.get("acid", False), reference=options.get("reference_substrate"),
                              force=force)
    if task == "sites":
        return prepare_sites(text, name, settings, acid=options.get("acid", False),
                             hydride=options.get("hydride", False), force=force)
    if task == "rate":
        from cationcalc.tasks.rate import prepare_rate, rate_options

        options = rate_options(options)
        return prepare_rate(text, name, settings, medium=options["medium"], temperature_k=options["rate_temperature_k"],
                            leaving_group=options.get("leaving_group", "auto"), force=force)
    return prepare_ladder(text, name, settings, groups=options.get("groups"), force=force)


def run_task(task: str, items: list[tuple[str, str]], settings: Settings, *, reference: str = DEFAULT_HIA_REFERENCE,
             workers: int = 1, force: bool = False, progress=None, store=None, **options) -> list[Record]:
    """Run one task over (input, name) pairs; typed records (:mod:`cationcalc.tasks.record_types`) in input order.

    ``hia``, ``heterolysis``, ``thermo`` and ``ionize`` give one record per
    input; ``sites`` and ``ladder`` one per site or leaving group, ranked.
    Options: ``reference`` (HIA anchor), and for the ionization tasks
    ``leaving_group`` (name or 'auto'), ``acid``, ``reference_substrate``
    (SMILES of the substrate ΔΔG_ion is measured against), ``hydride``
    (sites: scan C–H bonds even when a leaving group is present), ``groups``
    (ladder: restrict to these leaving groups), ``shifts`` (ionize/sites: add
    the downhill 1,2-shifts of every cation formed).  ``refine`` (a DFT level
    such as ``wB97X-D3BJ/def2-TZVP``): DFT single points on the GFN2-xTB
    structures (:mod:`cationcalc.execution.refine`); refined values take the usual keys,
    the GFN2-xTB ones sit beside them with ``_xtb`` before the unit;
    ``refine_top_k`` / ``refine_window_kcal_mol`` refine only the best
    requests of a ranking, ``refine_log`` receives the cost estimates.

    ``store`` (optional) is passed to :func:`~cationcalc.execution.executors.compute_many`
    so species already computed with the same settings are read, not recomputed.
    """
    if task not in TASKS:
        raise ValueError(f"unknown task {task!r}: choose one of {', '.join(TASKS)}")
    options = {"reference": reference, **options}
    if task == "rate":  # species at the E_f calibration's level; the rate temperature enters through Eyring
        from cationcalc.tasks.rate import descriptor_settings, rate_options

        if isinstance(options.get("medium"), (list, tuple)) and len(options["medium"]) > 1:
            # several media: one pass each, species shared through the store
            rest = {k: v for k, v in options.items() if k not in ("reference", "medium")}
            return [r for m in options["medium"] for r in run_task(
                task, items, settings, reference=reference, workers=workers, force=force, progress=progress,
                store=store, medium=m, **rest)]
        options = rate_options(options)
        settings = descriptor_settings(settings)
    groups = [prepare(task, text, name, settings, options, force) for text, name in items]
    needed = [sp for group in groups for p in group if p.error is None for sp in p.needs.values()]
    interrupted = False
    try:
        results = compute_many(needed, settings, workers=workers, progress=progress, store=store)
    except Interrupted as exc:
        results, interrupted = exc.results, True
    records = []
    finished_groups = []
    for group in groups:
        finished = []
        for p in group:
            if p.error is not None:
                finished.append({**p.base, "error": p.error, "warnings": [], "rearranged": False})
                continue
            res = {role: results[sp] for role, sp in p.needs.items()}
            failed = [f"{role} {sp.smiles}: {results[sp].message}" for role, sp in p.needs.items()
                      if isinstance(results[sp], SpeciesFailure)]
            if failed:
                finished.append({**p.base, "error": "; ".join(failed), "warnings": [], "rearranged": False})
                continue
            finished.append(p.finish(res))
        finished_groups.append(finished)
    refining = bool(options.get("refine")) and not interrupted
    if refining:  # DFT refinement tier (cationcalc.execution.refine): records rebuilt from refined species
        from cationcalc.execution.refine import refine_task_records

        try:
            finished_groups = refine_task_records(task, groups, finished_groups, results, settings, options,
                                                  workers=workers, force=force, store=store)
        except KeyboardInterrupt:  # keep the GFN2-xTB records, labelled as not refined
            from cationcalc.execution.refine import mark_unrefined

            interrupted, refining = True, False
            finished_groups = [mark_unrefined(finished, settings.level) for finished in finished_groups]
    for finished in finished_groups:
        if task == "rate":
            from cationcalc.tasks.rate import collate_rates

            records.extend(collate_rates(finished))
            continue
        records.extend(collate(task, finished, settings))
    if options.get("shifts") and task in ("ionize", "sites") and not interrupted:
        try:
            known = {sp: r for sp, r in results.items() if not isinstance(r, SpeciesFailure)}
            records = attach_shifts(records, known, settings, workers=workers, store=store, progress=progress,
                                    threshold_kcal_mol=options.get("shift_threshold_kcal_mol"))
        except Interrupted:
            interrupted = True
    if options.get("medium") is not None and task in ("ionize", "ladder") and not interrupted:
        from cationcalc.tasks.rate import add_rates

        try:
            records = add_rates(task, records, settings, options["medium"],
                                options.get("rate_temperature_k", settings.temperature_k),
                                workers=workers, store=store, progress=progress, force=force)
        except Interrupted:
            interrupted = True
    if task == "rate":
        records = typed_records(task, records)  # typed records from here on
        if interrupted:
            raise BatchInterrupted(records)
        return records
    from cationcalc.trust.uncertainty import annotate
    records = annotate(task, records, settings,
                       calibrated=bool(options.get("calibrated", False)) and not refining)
    if refining:
        from cationcalc.execution.refine import relabel_uncertainties

        records = relabel_uncertainties(records, calibrated=bool(options.get("calibrated", False)))
    records = typed_records(task, records)  # typed records from here on
    if interrupted:
        raise BatchInterrupted(records)
    return records


__all__ = ["run_task", "prepare", "TASKS", "SAFETY_NOTE"]
