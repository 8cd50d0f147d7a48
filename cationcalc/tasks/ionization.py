"""Ionization tasks: ``ionize``, ``sites`` and ``ladder`` as species requests and records.

* ``ionize``: ΔG_ion of R–X → R⁺ + X (X⁻ from a neutral substrate, neutral X
  from a cationic one) in the chosen solvent, ΔΔG_ion against a reference
  substrate (default: tert-butyl with the same leaving group), the
  equilibrium factor exp(−ΔΔG/RT) and a plausibility verdict.  With several
  leaving groups the most favourable site is reported and the others are
  listed under ``alternatives``.
* ``sites``: every symmetry-distinct ionization site, ranked by ΔG_ion; a
  molecule without a leaving group (or ``hydride=True``) is scanned by
  hydride abstraction at every symmetry-distinct C–H, ranked by HIA.
  Cations the structure rule flags (methyl, unstabilized primary, vinylic,
  aryl) and cations that are not minima rank after the others whatever
  their number: GFN2-xTB overstabilizes vinyl cations (it puts 2-propenyl
  below allyl, the reverse of experiment), so the number alone would mislead.
* ``ladder``: one skeleton (``*`` at the attachment point) with every
  leaving group of the library, ranked by ΔG_ion, with the Spearman ρ against
  published relative solvolysis rates where the groups overlap.

Example
-------
>>> from cationcalc.tasks.runner import run_task
>>> from cationcalc.compute.models import Settings
>>> r = run_task("ionize", [("CC(C)(C)Cl", "")], Settings(solvent="water"))[0]
>>> r["leaving_group"], r["verdict"], r["ddG_ion_kcal_mol"]
('chloride', 'SN1/E1 plausible', 0.0)
"""

from __future__ import annotations

import math
from functools import partial

from pydantic import field_validator

from cationcalc.chem import units
from cationcalc.chem.ionization import (TERT_BUTYL, IonizationSite, equilibrium_factor, heterolysis_sites, hydride_sites,
                         reference_substrate, skeleton_cation_smiles, structurally_flagged, verdict)
from cationcalc.chem.leaving_groups import attach, ladder_groups, leaving_group as lookup_leaving_group
from cationcalc.compute.models import Settings, SpeciesResult
from cationcalc.compute.properties import heterolysis_energy, hydride_ion_affinity
from cationcalc.tasks.funnel import (DEFAULT_SHIFT_WINDOW_KCAL_MOL, DEFAULT_SITE_WINDOW_KCAL_MOL, funnel_sites,
                                     funnel_shift_products, shift_products)
from cationcalc.tasks.records import Prepared, record_base, collect_warnings, species_profile
from cationcalc.chem.reference import DEFAULT_HIA_REFERENCE, hia_reference, load_table
from cationcalc.chem.species import InputError, Species, hydride_adduct
from cationcalc.execution.executors import Progress
from cationcalc.execution.refine import refine_task_records
from cationcalc.execution.store import ResultStore
from cationcalc.tasks.rate import medium_rates
from cationcalc.tasks.record_types import IonizeRecord, LadderRecord, SitesRecord
from cationcalc.tasks.registry import RefinableOptions, StepContext, TaskSpec, option, register, with_defaults
from cationcalc.tasks.views import (CATION, DDG_ION, DG_ION, HALF_LIFE, HIA, LG_K, REARRANGEMENT, SITE, SUBSTRATE,
                                    VERDICT, Column, site_tier)
from cationcalc.trust.uncertainty import annotate

SOLVATION_NOTE = ("implicit solvent ({model}) misses specific solvation of the anion (hydrogen bonds), which "
                  "matters most for small anions (F⁻, Cl⁻, OH⁻) in protic solvents")
EQUILIBRIUM_NOTE = ("equilibrium_factor = exp(−ΔΔG_ion/RT) is a ratio of ionization equilibrium constants, "
                    "not of rates")
LADDER_NOTE = ("ΔG_ion is an equilibrium quantity; solvolysis rates also reflect the transition state (ion-pair "
               "return, solvent assistance), so the kinetic order of leaving groups (sulfonates > iodide) need "
               "not follow it")


def _site_fields(site: IonizationSite) -> dict:
    return {"substrate_smiles": site.substrate.smiles, "cation_smiles": site.cation.smiles,
            "leaving_group": site.leaving_group, "leaving_group_smiles": site.departing.smiles,
            "site_atom": site.site_atom, "equivalent_atoms": list(site.equivalent_atoms),
            "protonated_oxygen": site.protonated_oxygen, "cation_class": site.cation_class}


def _cation_outcome(site: IonizationSite, res: dict[str, SpeciesResult]) -> dict:
    """What happened to the cation on optimisation, the warnings and the profile of one site."""
    cation = res["cation"]
    warnings = collect_warnings(res)
    if cation.rearranged:
        warnings.insert(0, f"the cation {site.cation.smiles} is not a minimum at this level: it relaxed to "
                           f"{cation.relaxed_smiles or 'a bridged structure'}")
    return {"rearranged": cation.rearranged, "relaxed_cation_smiles": cation.relaxed_smiles,
            "warnings": warnings, "profile": species_profile(res)}


def _heterolysis_prepared(site: IonizationSite, base: dict, settings: Settings,
                          reference: IonizationSite | None) -> Prepared:
    """ΔG_ion of one site, its tert-butyl analogue (for the verdict) and an optional user reference."""
    base = {**base, **_site_fields(site)}
    try:
        tbu = reference_substrate(site, TERT_BUTYL)
    except InputError as exc:
        return Prepared(base, error=str(exc))
    user = reference or tbu
    needs = {"substrate": site.substrate, "cation": Species(site.cation.smiles, 1, 1), "departing": site.departing,
             "tbu_substrate": tbu.substrate, "tbu_cation": Species(tbu.cation.smiles, 1, 1),
             "tbu_departing": tbu.departing, "reference_substrate": user.substrate,
             "reference_cation": Species(user.cation.smiles, 1, 1), "reference_departing": user.departing}
    base["reference_substrate"] = user.substrate.smiles

    def finish(res: dict[str, SpeciesResult]) -> dict:
        energy = heterolysis_energy(res["substrate"], res["cation"], res["departing"])
        tbu_energy = heterolysis_energy(res["tbu_substrate"], res["tbu_cation"], res["tbu_departing"])
        ref_energy = heterolysis_energy(res["reference_substrate"], res["reference_cation"],
                                        res["reference_departing"])
        ddg = energy.dG_kcal_mol - ref_energy.dG_kcal_mol
        ddg_tbu = energy.dG_kcal_mol - tbu_energy.dG_kcal_mol
        judged = verdict(site.cation_class, ddG_ion_kcal_mol=ddg_tbu, dG_ion_kcal_mol=energy.dG_kcal_mol,
                         solution=settings.solvent is not None, temperature_k=settings.temperature_k)
        record = dict(base)
        record.update({
            "dE_ion_kcal_mol": round(energy.dE_kcal_mol, 2),
            "dH_ion_kcal_mol": round(energy.dH_kcal_mol, 2),
            "minus_TdS_ion_kcal_mol": round(energy.minus_TdS_kcal_mol, 2),
            "dG_ion_kcal_mol": round(energy.dG_kcal_mol, 2),
            "dG_ion_kJ_mol": round(units.kcal_to_kj(energy.dG_kcal_mol), 1),
            "dG_ion_reference_kcal_mol": round(ref_energy.dG_kcal_mol, 2),
            "ddG_ion_kcal_mol": round(ddg, 2),
            "ddG_ion_kJ_mol": round(units.kcal_to_kj(ddg), 1),
            "equilibrium_factor": float(f"{equilibrium_factor(ddg, settings.temperature_k):.3g}"),
            "ddG_ion_vs_tert_butyl_kcal_mol": round(ddg_tbu, 2),
            "verdict": judged.verdict, "verdict_reason": judged.reason,
            "standard_state": "1 mol/L (solution)" if settings.solvent else "1 atm (gas)",
            "solvation_note": SOLVATION_NOTE.format(model=settings.level) if settings.solvent else "",
            "equilibrium_note": EQUILIBRIUM_NOTE,
            **_cation_outcome(site, res),
        })
        return record

    return Prepared(base, needs, finish=finish)


def _hydride_prepared(site: IonizationSite, base: dict, settings: Settings) -> Prepared:
    """HIA of the cation formed by hydride abstraction at one site (anchor: tert-butyl)."""
    anchor = hia_reference(DEFAULT_HIA_REFERENCE)
    base = {**base, **_site_fields(site), "reference": anchor.name, "reference_hia_kcal_mol": anchor.hia_kcal_mol,
            "reference_source": anchor.source, "reference_status": anchor.status}
    ref_cation = Species(anchor.cation_smiles, 1, 1)
    needs = {"cation": Species(site.cation.smiles, 1, 1), "adduct": hydride_adduct(site.cation),
             "reference_cation": ref_cation, "reference_adduct": Species(anchor.adduct_smiles, 0, 1)}

    def finish(res: dict[str, SpeciesResult]) -> dict:
        hia = hydride_ion_affinity(res["cation"], res["adduct"], res["reference_cation"], res["reference_adduct"],
                                   anchor)
        d_hia = hia.hia_kcal_mol - anchor.hia_kcal_mol
        judged = verdict(site.cation_class, dHIA_kcal_mol=d_hia, temperature_k=settings.temperature_k)
        record = dict(base)
        record.update({
            "hia_kcal_mol": round(hia.hia_kcal_mol, 2),
            "hia_kJ_mol": round(units.kcal_to_kj(hia.hia_kcal_mol), 1),
            "hia_G_kcal_mol": round(hia.hia_G_kcal_mol, 2),
            "dHIA_vs_tert_butyl_kcal_mol": round(d_hia, 2),
            "verdict": judged.verdict, "verdict_reason": judged.reason,
            **_cation_outcome(site, res),
        })
        return record

    return Prepared(base, needs, finish=finish)


def _user_reference(sites: list[IonizationSite], group_name: str, text: str) -> IonizationSite:
    """The reference substrate's site with the given leaving group (its only site otherwise)."""
    chosen = [s for s in sites if s.leaving_group == group_name] or sites
    if len(chosen) != 1:
        raise InputError(f"reference substrate {text!r} has {len(chosen)} ionization sites; give one with a single "
                         "leaving group, e.g. CC(C)(C)Cl")
    return chosen[0]


def prepare_ionize(text: str, name: str, settings: Settings, *, leaving_group: str = "auto", acid: bool = False,
                   reference: str | None = None, force: bool = False) -> list[Prepared]:
    base = {**record_base(text, name, settings), "task": "ionize"}
    try:
        group = None if leaving_group in (None, "", "auto") else lookup_leaving_group(leaving_group)
        sites = heterolysis_sites(text, leaving_group=group, acid=acid, force=force)
    except InputError as exc:
        return [Prepared(base, error=str(exc))]
    out = []
    try:
        reference_sites = heterolysis_sites(reference, force=force) if reference else None
        for site in sites:
            user = _user_reference(reference_sites, site.leaving_group, reference) if reference_sites else None
            out.append(_heterolysis_prepared(site, base, settings, user))
    except InputError as exc:
        return [Prepared(base, error=str(exc))]
    return out


def prepare_sites(text: str, name: str, settings: Settings, *, acid: bool = False, hydride: bool = False,
                  force: bool = False) -> list[Prepared]:
    base = {**record_base(text, name, settings), "task": "sites"}
    try:
        if hydride:
            return [_hydride_prepared(s, {**base, "site_kind": "hydride abstraction"}, settings)
                    for s in hydride_sites(text, force=force)]
        try:
            sites = heterolysis_sites(text, acid=acid, force=force)
        except InputError:
            if acid:
                raise
            # no leaving group: scan C–H bonds by hydride abstraction instead
            return [_hydride_prepared(s, {**base, "site_kind": "hydride abstraction"}, settings)
                    for s in hydride_sites(text, force=force)]
    except InputError as exc:
        return [Prepared(base, error=str(exc))]
    return [_heterolysis_prepared(s, {**base, "site_kind": "heterolysis"}, settings, None) for s in sites]


def prepare_ladder(skeleton: str, name: str, settings: Settings, *, groups: list[str] | None = None,
                   force: bool = False) -> list[Prepared]:
    base = {**record_base(skeleton, name, settings), "task": "ladder", "skeleton": skeleton}
    try:
        chosen = [lookup_leaving_group(g) for g in groups] if groups else ladder_groups()
        out = []
        for group in chosen:
            substrate = attach(skeleton, group)
            skeleton_cation = skeleton_cation_smiles(skeleton)
            sites = [s for s in heterolysis_sites(substrate, leaving_group=group, force=force)
                     if s.cation.smiles == skeleton_cation]
            if not sites:
                raise InputError(f"{skeleton!r} with {group.name}: no site at the attachment point")
            out.append(_heterolysis_prepared(sites[0], base, settings, None))
        return out
    except InputError as exc:
        return [Prepared(base, error=str(exc))]


def solvolysis_rates() -> dict[str, dict]:
    """Relative solvolysis rates of 1-phenylethyl-X by leaving-group name (bundled, with source)."""
    return {row["leaving_group"]: row for row in load_table("solvolysis_leaving_groups")}


def spearman_rho(x: list[float], y: list[float]) -> float:
    """Spearman rank correlation (average ranks for ties)."""
    from scipy.stats import spearmanr

    return float(spearmanr(x, y).statistic)


def collate(task: str, records: list[dict], settings: Settings) -> list[dict]:
    """Per-input post-processing into new records: choose (ionize) or rank (sites, ladder).

    Sites the funnel screened out come after the ranked ones (sites) or among the alternatives (ionize).
    """
    if task not in ("ionize", "sites", "ladder"):
        return records
    ok = [r for r in records if not r.get("error") and not r.get("screened")]
    screened = [r for r in records if r.get("screened")]
    failed = [r for r in records if r.get("error")]
    if task == "ionize":
        return [_chosen_site(records, ok, failed)]
    key = "hia_kcal_mol" if ok and "hia_kcal_mol" in ok[0] else "dG_ion_kcal_mol"
    # the ranking follows the verdict rule: cations the structure rule flags (methyl, unstabilized
    # primary, vinylic, aryl) and cations that are not minima (they relax to another cation) come
    # after the others whatever their number; within each tier, by the number
    ok.sort(key=_rank_key(key))
    ranked = [_ranked(r, rank, key, ok[0][key]) for rank, r in enumerate(ok, 1)]
    if task == "ladder":
        ranked = _with_solvolysis(ranked)
    return ranked + screened + failed


def _chosen_site(records: list[dict], ok: list[dict], failed: list[dict]) -> dict:
    """ionize: the most favourable site, the others listed as alternatives (or the errors of all)."""
    if not ok:
        return failed[0] if len(failed) == 1 else _merge_errors(failed)
    best = min(ok, key=_rank_key("dG_ion_kcal_mol"))
    keys = ("site_atom", "leaving_group", "cation_smiles", "dG_ion_kcal_mol", "verdict", "error")
    out = {**best, "alternatives": [{k: r.get(k) for k in keys + SCREENED_KEYS if k in keys or k in r}
                                     for r in records if r is not best]}
    if out["alternatives"]:
        out["warnings"] = best["warnings"] + [f"{len(records)} ionization sites: the most favourable is shown; "
                                              "`cationcalc sites` ranks them all"]
    return out


def _ranked(record: dict, rank: int, key: str, best_value: float) -> dict:
    """A ranked site: its rank, its gap to the best, and the verdict of a cation that is not a minimum."""
    gap = f"{key.replace('_kcal_mol', '')}_vs_best_kcal_mol"
    out = {**record, "rank": rank, gap: round(record[key] - best_value, 2)}
    if record.get("rearranged"):
        relaxed = record.get("relaxed_cation_smiles") or "a bridged structure"
        out["verdict"] = "not a minimum"
        out["verdict_reason"] = (f"the {record['cation_class']} cation {record['cation_smiles']} relaxes without a "
                                 f"barrier at this level to {relaxed}; the number belongs to that structure. "
                                 + record["verdict_reason"])
    return out


def _with_solvolysis(ranked: list[dict]) -> list[dict]:
    """ladder: each leaving group's published relative solvolysis rate and the Spearman ρ against ΔG_ion."""
    rates = solvolysis_rates()
    common = [r for r in ranked if r["leaving_group"] in rates]
    rho = None
    if len(common) >= 3:
        rho = spearman_rho([-r["dG_ion_kcal_mol"] for r in common],
                           [math.log10(float(rates[r["leaving_group"]]["k_rel"])) for r in common])
    first_row = next(iter(rates.values()), None)
    source = f"{first_row['source']} — 1-phenylethyl-X, {first_row['conditions']}" if first_row else ""
    rho_3 = round(rho, 3) if rho is not None else None

    def k_rel(r: dict) -> float | None:
        return float(rates[r["leaving_group"]]["k_rel"]) if r["leaving_group"] in rates else None

    return [{**r, "solvolysis_k_rel": k_rel(r), "spearman_rho_vs_solvolysis": rho_3,
             "solvolysis_n": len(common), "solvolysis_source": source,
             "solvolysis_status": first_row["status"] if first_row else None, "ladder_note": LADDER_NOTE}
            for r in ranked]


def attach_shifts(records: list[dict], known: dict, settings: Settings, *, workers: int = 1,
                  store: ResultStore | None = None, progress: Progress | None = None,
                  threshold_kcal_mol: float | None = None,
                  window_kcal_mol: float | None = DEFAULT_SHIFT_WINDOW_KCAL_MOL, computed: dict | None = None,
                  lowered: dict | None = None) -> list[dict]:
    """New records with a ``shifts`` section: the downhill 1,2-shifts of every cation formed (one shift deep).

    Cations already computed for the records (``known``: species → result) are
    reused; only the shift products are new, and of those only the ones at most ``window_kcal_mol`` above
    their cation at the screening level (:mod:`cationcalc.tasks.funnel`; None: all).  Records gain ``shifts`` (the
    flagged shifts, keys as in ``cationcalc shifts``), ``sink_smiles`` and a
    one-line ``shift_summary``.  ``computed`` (species → result) keeps the shift products between
    calls; ``lowered`` receives the cations of ``known`` that a product relaxed into below their
    lowest conformer, recomputed from it (:func:`~cationcalc.execution.lowest.settle_lowest`): the
    records' values that depend on them are then stale, and the caller finishes them again.
    """
    from cationcalc.execution.executors import compute_many
    from cationcalc.execution.lowest import settle_lowest
    from cationcalc.tasks.shifts import DEFAULT_THRESHOLD_KCAL_MOL, run_shifts

    threshold = DEFAULT_THRESHOLD_KCAL_MOL if threshold_kcal_mol is None else threshold_kcal_mol
    cations = list(dict.fromkeys(r["cation_smiles"] for r in records
                                 if not r.get("error") and not r.get("screened") and r.get("cation_smiles")))
    if not cations:
        return records
    parents = shift_products(cations)
    ctx = {"workers": workers, "progress": progress, "store": store}

    computed = {} if computed is None else computed
    lowered = {} if lowered is None else lowered
    tried: set = set()

    def compute(species_list):
        out = {sp: lowered.get(sp, known[sp]) for sp in species_list if sp in known}
        out.update({sp: computed[sp] for sp in species_list if sp in computed and sp not in out})
        missing = [sp for sp in species_list if sp not in out]
        full, screened = funnel_shift_products(missing, parents, settings, window_kcal_mol, ctx)
        out.update(screened)
        if full:
            out.update(compute_many(full, settings, workers=workers, progress=progress, store=store))
        computed.update({sp: r for sp, r in out.items() if sp not in known})
        return out

    def settle(cache):
        new = settle_lowest(cache, settings, store=store, tried=tried)
        lowered.update({sp: r for sp, r in new.items() if sp in known})
        computed.update({sp: r for sp, r in new.items() if sp not in known})
        return new

    found = dict(zip(cations, run_shifts([(c, "") for c in cations], settings, depth=1,
                                         threshold_kcal_mol=threshold, compute=compute, settle=settle)))
    return [_with_shifts(r, found[r.get("cation_smiles")]) if r.get("cation_smiles") in found else r
            for r in records]


def _with_shifts(record: dict, screen) -> dict:
    """A new record with the flagged shifts of its cation (or why the screen failed)."""
    if screen.get("error"):
        return {**record, "shifts": None, "sink_smiles": None,
                "warnings": record["warnings"] + [f"shift screen failed: {screen['error']}"]}
    out = {**record, "shifts": [s for s in screen["shifts"] if s["flagged"]],
           "sink_smiles": screen.get("sink_smiles"), "degenerate_shifts": screen.get("degenerate_shifts", [])}
    out["shift_summary"] = "; ".join(
        f"{s['kind']} → {s['product_smiles']}"
        + (f" (not a minimum: relaxes to {s['relaxed_to']})" if s.get("relaxed_to") else "")
        + f" ΔG {s['dG_kcal_mol']:+.1f}; {s.get('barrier_status', 'barrier not computed')}"
        for s in out["shifts"])
    out["rearrangement"] = rearrangement_text(out)
    return out


def rearrangement_text(record: dict) -> str:
    """Does the cation rearrange: the downhill shift (sink, ΔG, what is known of the barrier) and degenerate shifts.

    >>> rearrangement_text({"shifts": [{"kind": "alkyl", "product_smiles": "[CH2+]C(C)C", "relaxed_to": "C[C+](C)C",
    ...     "dG_kcal_mol": -16.0, "barrier_kcal_mol": None, "product_is_minimum": False}],
    ...     "degenerate_shifts": ["hydride (H) C2→C1"]})
    '→ C[C+](C)C via [CH2+]C(C)C, ΔG −16.0 kcal/mol, barrier unknown (intermediate not a minimum); degenerate: hydride (H) C2→C1'
    """
    from cationcalc.tasks.shifts import barrier_status

    parts = []
    shifts = record.get("shifts") or []
    if shifts:
        best = min(shifts, key=lambda s: s["dG_kcal_mol"])
        end = best.get("relaxed_to") if best.get("relaxed_to") not in (None, "bridged") else best["product_smiles"]
        via = f" via {best['product_smiles']}" if end != best["product_smiles"] else ""
        status = best.get("barrier_status") or barrier_status(best)
        if best.get("product_is_minimum") is False and best.get("barrier_kcal_mol") is None:
            status = "barrier unknown (intermediate not a minimum)"
        parts.append(f"→ {end}{via}, ΔG {best['dG_kcal_mol']:+.1f} kcal/mol, {status}".replace("ΔG +", "ΔG +")
                     .replace("ΔG -", "ΔG −"))
    elif record.get("shifts") is not None:
        parts.append("no downhill 1,2-shift")
    if record.get("degenerate_shifts"):
        parts.append("degenerate: " + ", ".join(record["degenerate_shifts"]))
    return "; ".join(parts)


def _rank_key(key: str):
    """Structurally flagged cations, then cations that are not minima, rank after the others."""
    return lambda r: (structurally_flagged(r["cation_class"]), bool(r.get("rearranged")), r[key])


def _merge_errors(failed: list[dict]) -> dict:
    first = dict(failed[0])
    first["error"] = "; ".join(dict.fromkeys(r["error"] for r in failed))
    return first


# ---------------------------------------------------------------- the task specs


def _known_medium(value):
    if value is None:
        return None
    from cationcalc.chem.media import medium

    return medium(str(value)).code  # InputError (a ValueError) lists the known media


SITE_WINDOW_HELP = ("sites more than this above the best at the screening level (one conformer, no Hessian) are "
                    "not computed in full (kcal/mol, default {default}; none: every site)")
SHIFT_WINDOW_HELP = ("shift products more than this above their cation at the screening level are not computed in "
                     "full (kcal/mol, default {default}; none: every product)")


class IonizeOptions(RefinableOptions):
    leaving_group: str = option("auto", "leaving group to break (name from the library, e.g. OTs, chloride), "
                                        "or auto")
    acid: bool = option(False, "protonate alcohol/ether oxygens (R–OH → R–OH2+)")
    reference_substrate: str | None = option(None, "substrate SMILES for ΔΔG_ion (default: tert-butyl with the "
                                                   "same leaving group)", flag="--reference",
                                             metavar="REFERENCE_SUBSTRATE")
    shifts: bool = option(True, "screen the cation formed for downhill 1,2-shifts",
                          cli_help="skip the screen for downhill 1,2-shifts of the cation formed")
    medium: str | None = option(None, "solvolysis medium for rate constants and half-lives (80E20W, '80% ethanol', "
                                      "'97% TFE (w/w)', water, …); the verdict then speaks in time")
    site_window_kcal_mol: float | None = option(DEFAULT_SITE_WINDOW_KCAL_MOL, SITE_WINDOW_HELP, ge=0,
                                                flag="--site-window", metavar="KCAL_MOL")
    shift_window_kcal_mol: float | None = option(DEFAULT_SHIFT_WINDOW_KCAL_MOL, SHIFT_WINDOW_HELP, ge=0,
                                                 flag="--shift-window", metavar="KCAL_MOL")

    _medium = field_validator("medium")(classmethod(lambda cls, v: _known_medium(v)))


class SitesOptions(RefinableOptions):
    acid: bool = option(False, "protonate alcohol/ether oxygens first")
    hydride: bool = option(False, "scan hydride abstraction at every C–H even when a leaving group is present")
    shifts: bool = option(True, "screen each cation formed for downhill 1,2-shifts",
                          cli_help="skip the screen for downhill 1,2-shifts of the cations formed")
    site_window_kcal_mol: float | None = option(DEFAULT_SITE_WINDOW_KCAL_MOL, SITE_WINDOW_HELP, ge=0,
                                                flag="--site-window", metavar="KCAL_MOL")
    shift_window_kcal_mol: float | None = option(DEFAULT_SHIFT_WINDOW_KCAL_MOL, SHIFT_WINDOW_HELP, ge=0,
                                                 flag="--shift-window", metavar="KCAL_MOL")


class LadderOptions(RefinableOptions):
    groups: list[str] | None = option(None, "comma-separated leaving groups to include (default: the whole library)",
                                      comma_list=True)
    medium: str | None = option(None, "solvolysis medium: half-life per leaving group where its N_f is published")

    _medium = field_validator("medium")(classmethod(lambda cls, v: _known_medium(v)))


def _ionize(text: str, name: str, settings: Settings, options: dict, force: bool) -> list[Prepared]:
    o = with_defaults(IonizeOptions, options)
    return prepare_ionize(text, name, settings, leaving_group=o["leaving_group"], acid=o["acid"],
                          reference=o["reference_substrate"], force=force)


def _sites(text: str, name: str, settings: Settings, options: dict, force: bool) -> list[Prepared]:
    o = with_defaults(SitesOptions, options)
    return prepare_sites(text, name, settings, acid=o["acid"], hydride=o["hydride"], force=force)


def _ladder(text: str, name: str, settings: Settings, options: dict, force: bool) -> list[Prepared]:
    return prepare_ladder(text, name, settings, groups=with_defaults(LadderOptions, options)["groups"], force=force)


#: the keys of a site the funnel screened out, besides the site's own
SCREENED_KEYS = ("screened", "screen_gap_kcal_mol", "dE_ion_screen_kcal_mol")


def _screened_site(p: Prepared, score_kcal_mol: float, above_best_kcal_mol: float, outranked: bool) -> dict:
    """The record of a site the funnel screened out: where it stood at the screening level, why no number."""
    heterolysis = "substrate" in p.needs
    where = f"{'ΔE_ion' if heterolysis else 'the cation'} at the screening level (one conformer, no Hessian)"
    why = (f"the {p.base['cation_class']} cation ranks after the stabilized sites (structurally flagged, or not a "
           f"minimum at the screening level) whatever its energy ({where} {above_best_kcal_mol:+.1f} kcal/mol "
           "against the best)" if outranked else
           f"{where} is {above_best_kcal_mol:.1f} kcal/mol above the best site's, outside the site window")
    return {**p.base, "screened": True, "screen_gap_kcal_mol": round(above_best_kcal_mol, 2),
            "dE_ion_screen_kcal_mol": round(score_kcal_mol, 2) if heterolysis else None,
            "verdict": "screened out",
            "verdict_reason": why + "; not computed in full (--site-window none or --thorough computes every site)",
            "warnings": [], "rearranged": False, "profile": {}}


def funnel(groups: list[list[Prepared]], settings: Settings, options: dict, ctx: dict) -> list[list[Prepared]]:
    """ionize, sites: the sites outside the window at the screening level are not computed in full."""
    return funnel_sites(groups, settings, options.get("site_window_kcal_mol", DEFAULT_SITE_WINDOW_KCAL_MOL), ctx,
                        _screened_site, tier=_screening_tier)


def _screening_tier(p: Prepared, results: dict[str, SpeciesResult]) -> tuple:
    """The ranking's tiers at the screening level: flagged cations, then cations that are not minima, rank after."""
    return (structurally_flagged(p.base["cation_class"]), bool(results["cation"].rearranged))


def screen_shifts(records: list[dict], options: dict, ctx: StepContext) -> list[dict]:
    """Step after collation: the downhill 1,2-shifts of every cation formed, when ``shifts`` is on."""
    if not options.get("shifts"):
        return records
    from cationcalc.execution.executors import SpeciesFailure

    known = {sp: r for sp, r in ctx.results.items() if not isinstance(r, SpeciesFailure)}
    return attach_shifts(records, known, ctx.settings, workers=ctx.workers, store=ctx.store, progress=ctx.progress,
                         threshold_kcal_mol=options.get("shift_threshold_kcal_mol"),
                         window_kcal_mol=options.get("shift_window_kcal_mol", DEFAULT_SHIFT_WINDOW_KCAL_MOL),
                         computed=ctx.computed, lowered=ctx.lowered)


_WIDE_SHIFT = ("shift_summary", "downhill 1,2-shift (ΔG)")
_HOOKS = dict(refine=refine_task_records, uncertainty=annotate)

IONIZE = register(TaskSpec(
    name="ionize", record=IonizeRecord,
    help="ΔG of ionization R–X → R⁺ + X in a solvent, with a verdict", options=IonizeOptions,
    headline="dG_ion_kcal_mol",
    view=(SUBSTRATE, SITE, CATION, DG_ION, DDG_ION, HALF_LIFE, VERDICT, REARRANGEMENT),
    wide=(("name", "name"), ("substrate_smiles", "substrate"), ("leaving_group", "X"), ("site_atom", "atom"),
          ("cation_class", "cation"), ("dG_ion_kcal_mol", "ΔG_ion kcal/mol"),
          ("dG_ion_xtb_kcal_mol", "ΔG_ion GFN2-xTB"), ("ddG_ion_kcal_mol", "ΔΔG_ion"),
          ("equilibrium_factor", "K/K_ref (equilibrium)"), ("half_life_text", "half-life"),
          ("verdict", "verdict"), _WIDE_SHIFT),
    title="ionization R–X → R⁺ + X", report_title="will it ionize? R–X → R⁺ + X",
    prepare=_ionize, funnel=funnel, collate=partial(collate, "ionize"), after=(screen_shifts, medium_rates), **_HOOKS))

SITES = register(TaskSpec(
    name="sites", record=SitesRecord,
    help="rank every ionization site of a substrate (or every C–H by HIA)", options=SitesOptions,
    headline="dG_ion_kcal_mol",
    view=(SUBSTRATE, Column("rank", "rank", "int"), Column("tier", "site tier", get=site_tier), SITE, CATION,
          DG_ION,
          Column("dG_ion_vs_best_kcal_mol", "ΔG_ion − best (kcal/mol)", "value",
                 "dG_ion_vs_best_uncertainty_kcal_mol"),
          HIA, Column("hia_vs_best_kcal_mol", "HIA − best (kcal/mol)", "value", "hia_vs_best_uncertainty_kcal_mol"),
          VERDICT, REARRANGEMENT),
    wide=(("name", "name"), ("rank", "#"), ("site_atom", "atom"), ("equivalent_atoms", "equivalent"),
          ("leaving_group", "X"), ("cation_smiles", "cation"), ("cation_class", "class"),
          ("dG_ion_kcal_mol", "ΔG_ion kcal/mol"), ("dG_ion_vs_best_kcal_mol", "Δ vs #1"),
          ("hia_kcal_mol", "HIA kcal/mol"), ("hia_vs_best_kcal_mol", "Δ vs #1"), ("verdict", "verdict"),
          _WIDE_SHIFT),
    title="ionization sites", report_title="where does it ionize? (sites ranked)",
    prepare=_sites, funnel=funnel, collate=partial(collate, "sites"), after=(screen_shifts,), calibrated=True, **_HOOKS))

LADDER = register(TaskSpec(
    name="ladder", record=LadderRecord,
    help="ΔG_ion of one skeleton (written with *) for every leaving group", options=LadderOptions,
    headline="dG_ion_kcal_mol",
    view=(SUBSTRATE, Column("rank", "rank", "int"), Column("leaving_group", "leaving group"), DG_ION,
          Column("dG_ion_vs_best_kcal_mol", "ΔG_ion − best (kcal/mol)", "value"),
          Column("solvolysis_k_rel", "published k_rel (solvolysis)", "factor"),
          Column("half_life_rank", "rank by rate", "int"), HALF_LIFE, LG_K, VERDICT),
    wide=(("name", "name"), ("rank", "#"), ("leaving_group", "leaving group"),
          ("substrate_smiles", "substrate"), ("dG_ion_kcal_mol", "ΔG_ion kcal/mol"),
          ("dG_ion_vs_best_kcal_mol", "Δ vs #1"), ("solvolysis_k_rel", "k_rel (solvolysis)"),
          ("half_life_rank", "# by rate"), ("half_life_text", "half-life"), ("lg_k_ion", "lg k"),
          ("verdict", "verdict")),
    title="leaving-group ladder", report_title="which leaving group? (ladder)",
    prepare=_ladder, collate=partial(collate, "ladder"), after=(medium_rates,), **_HOOKS))


__all__ = ["IONIZE", "SITES", "LADDER", "IonizeOptions", "SitesOptions", "LadderOptions", "screen_shifts",
           "prepare_ionize", "prepare_sites", "prepare_ladder", "collate", "attach_shifts", "rearrangement_text", "solvolysis_rates", "spearman_rho",
           "SOLVATION_NOTE", "EQUILIBRIUM_NOTE", "LADDER_NOTE"]
