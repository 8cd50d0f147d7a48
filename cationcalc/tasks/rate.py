"""The ``rate`` task: how fast R–X ionizes in a named medium, and how long the cation lives there.

Per substrate and ionization site: E_f of the cation (computed from its
gas-phase HIA, see :mod:`cationcalc.trust.electrofuges`; the published value where the cation
is tabulated), N_f and s_f of the leaving group in the medium
(:mod:`cationcalc.trust.nucleofuges`), lg k₁ = s_f(N_f + E_f) at 25 °C, carried to
the requested temperature by the Eyring equation (:mod:`cationcalc.chem.kinetics`),
the half-life, the cation's lifetime against capture by the solvent
(Mayr–Patz), an applicability verdict and a verdict in time.

Applicability (``data/rate_applicability.csv``): benzhydrylium-type cations
are inside the calibration; tertiary alkyl cations are checked against
tert-butyl chloride (whose cation is the descriptor's anchor, so the check
needs no computation); substrates that solvolyse with solvent assistance
(secondary and primary alkyl, primary benzylic and allylic, vinylic, aryl)
get no rate, only the SN1-only figure labelled as a lower bound; other
classes get the number with a widened uncertainty and a flag.

Example
-------
>>> from cationcalc.tasks.rate import kinetic_fields
>>> from cationcalc.trust.electrofuges import estimate_electrofuge
>>> from cationcalc.trust.nucleofuges import nucleofugality
>>> from cationcalc.chem.media import medium
>>> m = medium("80E20W")
>>> est = estimate_electrofuge("c1ccc([CH+]c2ccccc2)cc1", 228.7)   # published E_f is used for benzhydrylium
>>> f = kinetic_fields(est, nucleofugality("chloride", m), m, "ClC(c1ccccc1)c1ccccc1", "benzylic (secondary)",
...                    298.15)
>>> f["E_f"], f"{f['k_ion_per_s']:.2g}", f["applicability"].split(":")[0]
(-6.03, '0.0017', 'calibrated')
"""

from __future__ import annotations

import math
from functools import lru_cache

from pydantic import field_validator
from rdkit import Chem

from cationcalc.chem import units
from cationcalc.trust.electrofuges import (DESCRIPTOR_SOLVENT, ElectrofugeEstimate, electrofugality_calibration,
                                           estimate_electrofuge)
from cationcalc.chem.ionization import heterolysis_sites, structurally_flagged
from cationcalc.chem.kinetics import (EQUATION_ERROR_LG, ELECTROFUGE_TEMPERATURE_K, FREE_CATION_CAPTURE_LIMIT_PER_S,
                       MAYR_PATZ_TEMPERATURE_K, RATE_TEMPERATURE_RANGE_K, activation_parameters, combined,
                       half_life_s, human_time, lg_k_at_temperature, lg_k_capture, lg_k_ionization,
                       temperature_band_lg, time_verdict)
from cationcalc.chem.leaving_groups import leaving_group as lookup_leaving_group
from cationcalc.chem.media import Medium
from cationcalc.compute.models import Settings, SpeciesResult
from cationcalc.execution.executors import Progress
from cationcalc.execution.store import ResultStore
from cationcalc.trust.nucleofuges import Nucleofugality, nucleofugality
from cationcalc.compute.properties import hydride_ion_affinity
from cationcalc.tasks.records import Prepared, record_base, collect_warnings, species_profile
from cationcalc.tasks.record_types import RateRecord
from cationcalc.tasks.registry import StepContext, TaskOptions, TaskSpec, option, register
from cationcalc.tasks.views import HALF_LIFE, LG_K, SITE, SUBSTRATE, VERDICT, Column, nucleofugality_label
from cationcalc.chem.reference import DEFAULT_HIA_REFERENCE, hia_reference, load_table
from cationcalc.chem.species import InputError, Species, carbocation, hydride_adduct

#: log units added in quadrature for a cation class the calibration has not been checked on (project choice:
#: the tolerance the tert-butyl check is held to)
UNCALIBRATED_CLASS_LG = 2.0
#: largest |predicted − published| lg k for the tert-butyl check to pass (stated in the kinetics requirements)
TERT_BUTYL_CHECK_LG = 2.0
#: a lifetime shorter than a bond vibration (about 0.1 ps) is not a lifetime of an intermediate at all
#: (common practice, no source)
VIBRATION_S = 1e-13
RATE_NOTE = ("lg k₁ = s_f(N_f + E_f) at 25 °C (electrofuge–nucleofuge equation; Denegri, B. et al. Chem. Eur. J. "
             "2006, 12, 1648), carried to the stated temperature with the Eyring equation; cation lifetime "
             "1/k from the Mayr–Patz equation lg k = s_N(N₁ + E) with the solvent as nucleophile (20 °C)")


def check_temperature(temperature_k: float) -> float:
    low, high = RATE_TEMPERATURE_RANGE_K
    if not (isinstance(temperature_k, (int, float)) and math.isfinite(temperature_k) and low <= temperature_k <= high):
        raise InputError(f"rate temperature {temperature_k!r} K is outside {low:.2f}–{high:.2f} K (0–150 °C), where "
                         "solvolysis rates are extrapolated; give a temperature in K inside that range")
    return float(temperature_k)


def rate_options(options: dict) -> dict:
    """The rate task's options with ``medium`` resolved (a name, a Medium, or a one-item list) and the
    temperature under ``rate_temperature_k`` (a workflow writes ``temperature_k``)."""
    from cationcalc.chem.media import medium as lookup_medium

    out = dict(options)
    chosen = out.get("medium")
    if isinstance(chosen, (list, tuple)):
        chosen = chosen[0] if chosen else None
    if chosen is None:
        raise ValueError("the rate task needs a medium, e.g. medium='80E20W'")
    out["medium"] = lookup_medium(chosen) if isinstance(chosen, str) else chosen
    out["rate_temperature_k"] = out.pop("temperature_k", out.get("rate_temperature_k", ELECTROFUGE_TEMPERATURE_K))
    return out


def descriptor_settings(settings: Settings) -> Settings:
    """The settings the E_f calibration was computed with (gas phase, 298.15 K, tblite, the full protocol:
    a Hessian on every conformer, LBFGS), the user's other numerics kept."""
    return Settings.model_validate({**settings.full_protocol().model_dump(), "solvent": DESCRIPTOR_SOLVENT,
                                    "engine": "tblite", "temperature_k": ELECTROFUGE_TEMPERATURE_K,
                                    "pressure_pa": 101325.0})


# ---------------------------------------------------------------- applicability


@lru_cache(maxsize=1)
def applicability_rules() -> tuple[dict, ...]:
    return load_table("rate_applicability")


def rate_class(cation_smiles: str, cation_class: str) -> str:
    """The class the applicability rules speak of: diarylmethyl/triarylmethyl, else the cation class."""
    cation = carbocation(cation_smiles, force=True)
    mol = Chem.MolFromSmiles(cation.smiles)
    centre = mol.GetAtomWithIdx(cation.centre)
    aryl = sum(1 for n in centre.GetNeighbors() if n.GetIsAromatic() and n.GetSymbol() == "C")
    if aryl == 2 and centre.GetTotalNumHs() == 1:
        return "diarylmethyl"
    if aryl == 3:
        return "triarylmethyl"
    return cation_class


def _rule(klass: str) -> dict:
    rules = applicability_rules()
    return (next((r for r in rules if r["class"] == klass), None)
            or next((r for r in rules if r["class"] == klass.split(" (")[0]), None)
            or next(r for r in rules if r["class"] == "*"))


@lru_cache(maxsize=None)
def tert_butyl_check(level: str | None = None) -> list[dict]:
    """Predicted against published lg k for every tert-butyl chloride row of the bundled rate set.

    The tert-butyl cation is the anchor of the hydride exchange, so its
    descriptor is the anchor's published HIA at any level: the check is pure
    arithmetic over the calibration and the tables.
    """
    from cationcalc.chem.media import medium

    anchor = hia_reference(DEFAULT_HIA_REFERENCE)
    est = estimate_electrofuge(anchor.cation_smiles, anchor.hia_kcal_mol, level)
    out = []
    for row in load_table("solvolysis_rates"):
        if row["substrate_smiles"] != "CC(C)(C)Cl":
            continue
        m = medium(row["medium"])
        nf = nucleofugality("chloride", m)
        lg = lg_k_ionization(est.E_f_computed, nf.N_f, nf.s_f)
        out.append({"medium": m.code, "lg_k_predicted": round(lg, 2),
                    "lg_k_published": round(math.log10(float(row["k_per_s"])), 2),
                    "error": round(lg - math.log10(float(row["k_per_s"])), 2), "source": row["source"],
                    "status": row["status"]})
    return out


def applicability(klass: str, level: str | None = None) -> tuple[str, float]:
    """('calibrated: …' / 'checked: …' / 'uncalibrated class: …' / 'outside the SN1 model: …', extra log error);
    the tert-butyl check is made with the E_f calibration at the descriptor's ``level``."""
    rule = _rule(klass)
    kind = rule["applicability"]
    if kind == "checked":
        rows = tert_butyl_check(level)
        worst = max(abs(r["error"]) for r in rows)
        detail = "; ".join(f"{r['medium']} {r['lg_k_predicted']:+.2f} vs {r['lg_k_published']:+.2f}" for r in rows)
        if worst <= TERT_BUTYL_CHECK_LG:
            return f"checked: {rule['meaning']} (tert-butyl chloride lg k predicted vs published: {detail})", worst
        return (f"uncalibrated class: {klass}: the tert-butyl chloride check misses by {worst:.1f} log units "
                f"({detail})", max(worst, UNCALIBRATED_CLASS_LG))
    if kind == "calibrated":
        return f"calibrated: {rule['meaning']}", 0.0
    if kind == "outside":
        return f"outside the SN1 model: {rule['meaning']}", 0.0
    return f"uncalibrated class: {klass}: {rule['meaning']}", UNCALIBRATED_CLASS_LG


# ---------------------------------------------------------------- the record fields


@lru_cache(maxsize=1)
def _nucleophilicities() -> dict[str, dict]:
    return {r["medium"]: r for r in load_table("solvent_nucleophilicity")}


def lifetime_fields(est: ElectrofugeEstimate, m: Medium) -> dict:
    """Capture rate of the cation by the medium (Mayr–Patz, 20 °C) and its lifetime."""
    row = _nucleophilicities().get(m.nucleophilicity_key)
    if row is None:
        return {"k_capture_per_s": None, "lifetime_s": None, "lg_k_capture": None, "N1": None, "s_N": None,
                "nucleophilicity_source": f"no published solvent nucleophilicity for {m.code}", "free_cation": None}
    lg = lg_k_capture(est.E, float(row["N1"]), float(row["s_N"]))
    k = 10.0 ** lg
    lifetime = 1.0 / k
    text = human_time(lifetime) if lifetime >= VIBRATION_S else "< 0.1 ps (no intermediate)"
    return {"lg_k_capture": round(lg, 2), "k_capture_per_s": float(f"{k:.3g}"), "lifetime_s": float(f"{lifetime:.3g}"),
            "lifetime_text": text, "N1": float(row["N1"]), "s_N": float(row["s_N"]),
            "capture_temperature_k": MAYR_PATZ_TEMPERATURE_K,
            "nucleophilicity_source": f"{row['source']} [{row['status']}]", "E": round(est.E, 2),
            "E_computed": round(est.E_computed, 2), "E_source": est.E_source,
            "free_cation": k < FREE_CATION_CAPTURE_LIMIT_PER_S}


def kinetic_fields(est: ElectrofugeEstimate, nf: Nucleofugality, m: Medium, substrate_smiles: str,
                   cation_class: str, temperature_k: float) -> dict:
    """Every kinetic key of a record: pure arithmetic over the estimate, the tables and the temperature."""
    klass = rate_class(est.cation_smiles, cation_class)
    verdict_of_class, class_error = applicability(klass, est.level)
    lg_298 = lg_k_ionization(est.E_f, nf.N_f, nf.s_f)
    lg_298_computed = lg_k_ionization(est.E_f_computed, nf.N_f, nf.s_f)
    activation = activation_parameters(substrate_smiles, m.code, 10.0 ** lg_298)
    lg_t = lg_k_at_temperature(lg_298, temperature_k, activation.enthalpy_kJ_mol)
    lg_t_computed = lg_k_at_temperature(lg_298_computed, temperature_k, activation.enthalpy_kJ_mol)
    t_band = temperature_band_lg(temperature_k, activation.enthalpy_uncertainty_kJ_mol)
    uncertainty = combined(nf.s_f * est.E_f_uncertainty, nf.uncertainty_lg, EQUATION_ERROR_LG, t_band, class_error)
    uncertainty_computed = combined(nf.s_f * est.E_f_computed_uncertainty, nf.uncertainty_lg, EQUATION_ERROR_LG,
                                    t_band, class_error)
    notes = _kinetic_notes(est, nf, m)
    life = lifetime_fields(est, m)
    applies = not verdict_of_class.startswith("outside")
    where = f"in {m.code} at {temperature_k - units.ZERO_CELSIUS_K:.0f} °C"
    record = {
        "medium": m.code, "medium_name": m.name, "rate_temperature_k": round(temperature_k, 2),
        "rate_class": klass, "applicability": verdict_of_class,
        "applicability_status": verdict_of_class.split(":")[0],
        "E_f": round(est.E_f, 2), "E_f_computed": round(est.E_f_computed, 2),
        "E_f_computed_uncertainty": round(est.E_f_computed_uncertainty, 2), "E_f_source": est.E_f_source,
        "descriptor_hia_kcal_mol": round(est.descriptor_kcal_mol, 2), "descriptor_level": est.level,
        "N_f": round(nf.N_f, 2), "s_f": round(nf.s_f, 2), "nucleofugality_source": f"{nf.source} [{nf.status}]",
        "nucleofugality_estimated": nf.estimated, "N_f_fit_range": nf.range_text(),
        "lg_k_ion_computed": round(lg_t_computed, 2), "lg_k_ion_computed_uncertainty": round(uncertainty_computed, 2),
        "activation_enthalpy_kJ_mol": round(activation.enthalpy_kJ_mol, 1),
        "activation_source": activation.source, "rate_note": RATE_NOTE,
        **life,
        "kinetic_notes": notes,
    }
    if applies:
        record.update(_sn1_rate_fields(lg_t, uncertainty, where))
        if life.get("free_cation") is False:
            notes.append(f"no free cation: lifetime {life['lifetime_text']} in {m.code} (captured in the ion pair, "
                         "or concerted)")
    else:
        record.update(_outside_model_fields(verdict_of_class, lg_t_computed, where))
    return record


def _kinetic_notes(est: ElectrofugeEstimate, nf: Nucleofugality, m: Medium) -> list[str]:
    """Extrapolations and estimated inputs behind the rate constant, in words."""
    notes: list[str] = []
    covered = nf.covers(est.E_f)
    if covered is False:
        notes.append(f"E_f {est.E_f:+.2f} outside the N_f fit range {nf.range_text()}: extrapolated")
    if not est.descriptor_in_range:
        low, high = electrofugality_calibration(est.level).descriptor_range()
        notes.append(f"HIA {est.descriptor_kcal_mol:.1f} kcal/mol outside the E_f calibration's "
                     f"{low:.1f}–{high:.1f}: extrapolated")
    if nf.estimated:
        notes.append(f"N_f of {nf.leaving_group} in {m.code} is {nf.route}")
    if m.notes:
        notes.append(f"medium {m.code}: {m.notes}")
    return notes


def _sn1_rate_fields(lg_t: float, uncertainty: float, where: str) -> dict:
    """Rate constant, half-life and verdict when the SN1 model applies to the cation's class."""
    k = 10.0 ** lg_t
    t_half = half_life_s(k)
    judged = time_verdict(t_half, where)
    return {"k_ion_per_s": float(f"{k:.3g}"), "lg_k_ion": round(lg_t, 2),
            "lg_k_ion_uncertainty": round(uncertainty, 2), "half_life_s": float(f"{t_half:.3g}"),
            "lg_k_ion_text": f"{lg_t:+.2f} ± {uncertainty:.2f}",
            "half_life_text": human_time(t_half),
            "half_life_range_text": f"{human_time(t_half / 10 ** uncertainty)} – "
                                    f"{human_time(t_half * 10 ** uncertainty)}",
            "rate_verdict": judged.verdict, "rate_verdict_reason": judged.reason,
            "k_ion_sn1_only_per_s": None}


def _outside_model_fields(verdict_of_class: str, lg_t_computed: float, where: str) -> dict:
    """Empty rate fields and the SN1-only lower bound when the cation's class is outside the model."""
    return {"k_ion_per_s": None, "lg_k_ion": None, "lg_k_ion_uncertainty": None, "half_life_s": None,
            "half_life_text": "—", "half_life_range_text": "—",
            "lg_k_ion_text": f"(SN1 only ≥ {lg_t_computed:+.1f})",
            "rate_verdict": "outside the SN1 model",
            "rate_verdict_reason": f"{verdict_of_class}; the SN1-only rate constant "
                                   f"{10 ** lg_t_computed:.2g} s⁻¹ {where} is a lower bound for the "
                                   "observed solvolysis",
            "k_ion_sn1_only_per_s": float(f"{10 ** lg_t_computed:.3g}")}


# ---------------------------------------------------------------- the task


def _rate_prepared(site, base: dict, settings: Settings, m: Medium, temperature_k: float) -> Prepared:
    base = {**base, "substrate_smiles": site.substrate.smiles, "cation_smiles": site.cation.smiles,
            "leaving_group": site.leaving_group, "site_atom": site.site_atom,
            "equivalent_atoms": list(site.equivalent_atoms), "cation_class": site.cation_class}
    try:
        nf = nucleofugality(site.leaving_group, m)
    except InputError as exc:
        return Prepared(base, error=str(exc))
    needs = _descriptor_needs(site.cation.smiles)

    def finish(res: dict[str, SpeciesResult]) -> dict:
        est = _electrofuge_estimate(site.cation.smiles, res)
        record = {**base, **kinetic_fields(est, nf, m, site.substrate.smiles, site.cation_class, temperature_k),
                  "rearranged": res["cation"].rearranged, "relaxed_cation_smiles": res["cation"].relaxed_smiles,
                  "warnings": collect_warnings(res), "profile": species_profile(res)}
        if res["cation"].rearranged:
            record["warnings"].insert(0, f"the cation {site.cation.smiles} is not a minimum at this level: it "
                                         f"relaxed to {res['cation'].relaxed_smiles or 'a bridged structure'}, so "
                                         "E_f belongs to that structure")
        if record.get("rate_verdict"):
            record["verdict"], record["verdict_reason"] = record["rate_verdict"], record["rate_verdict_reason"]
        return record

    return Prepared(base, needs, finish=finish)


def prepare_rate(text: str, name: str, settings: Settings, *, medium: Medium, temperature_k: float,
                 leaving_group: str = "auto", force: bool = False) -> list[Prepared]:
    """One request per ionization site with a nucleofugality in the medium (settings: descriptor settings)."""
    base = {**record_base(text, name, settings), "task": "rate", "medium": medium.code, "rate_temperature_k": temperature_k}
    try:
        check_temperature(temperature_k)
        group = None if leaving_group in (None, "", "auto") else lookup_leaving_group(leaving_group)
        sites = heterolysis_sites(text, leaving_group=group, force=force)
    except InputError as exc:
        return [Prepared(base, error=str(exc))]
    flagged = [s for s in sites if structurally_flagged(s.cation_class)]
    if len(flagged) < len(sites):  # aryl, vinylic, methyl or primary sites beside a real one: not computed
        sites = [s for s in sites if s not in flagged]
        base["sites_outside_the_model"] = [f"{s.leaving_group} at atom {s.site_atom} ({s.cation_class})"
                                           for s in flagged]
    prepared = [_rate_prepared(site, base, settings, medium, temperature_k) for site in sites]
    usable = [p for p in prepared if p.error is None]
    if not usable:
        return prepared[:1]
    skipped = [f"{p.base['leaving_group']} at atom {p.base['site_atom']}: {p.error.split(';')[0]}"
               for p in prepared if p.error is not None]
    for p in usable:
        p.base["sites_without_nucleofugality"] = skipped
    return usable


def _electrofuge_estimate(cation_smiles: str, by_role: dict[str, SpeciesResult]) -> ElectrofugeEstimate:
    """E_f and E of a cation from the results of its descriptor species (roles as in _descriptor_needs)."""
    hia = hydride_ion_affinity(by_role["cation"], by_role["adduct"], by_role["reference_cation"],
                               by_role["reference_adduct"], hia_reference(DEFAULT_HIA_REFERENCE))
    return estimate_electrofuge(cation_smiles, hia.hia_kcal_mol, level=by_role["cation"].level)


def _descriptor_needs(cation_smiles: str) -> dict[str, Species]:
    """The cation, its hydride adduct and the tert-butyl pair: the species of the HIA descriptor."""
    anchor = hia_reference(DEFAULT_HIA_REFERENCE)
    cation = carbocation(cation_smiles, force=True)
    return {"cation": Species(cation.smiles, 1, 1), "adduct": hydride_adduct(cation),
            "reference_cation": Species(anchor.cation_smiles, 1, 1),
            "reference_adduct": Species(anchor.adduct_smiles, 0, 1)}


def add_rates(task: str, records: list[dict], settings: Settings, m: Medium | str, temperature_k: float, *,
              workers: int = 1, store: ResultStore | None = None, progress: Progress | None = None,
              force: bool = False) -> list[dict]:
    """New ``ionize`` and ``ladder`` records with kinetic keys (a second pass at the descriptor's level).

    Where a rate exists the verdict speaks in time (the equilibrium verdict is kept
    as ``equilibrium_verdict``).  ``ladder``: every leaving group with an N_f in the
    medium gets its half-life and a ``half_life_rank``; the others say why not.  The
    records given are not changed.
    """
    from cationcalc.execution.executors import SpeciesFailure, compute_many
    from cationcalc.chem.media import medium as lookup_medium

    m = lookup_medium(m) if isinstance(m, str) else m
    check_temperature(temperature_k)
    wanted = {r["cation_smiles"]: _descriptor_needs(r["cation_smiles"])
              for r in records if not r.get("error") and r.get("cation_smiles")}
    species_needed = list(dict.fromkeys(sp for needs in wanted.values() for sp in needs.values()))
    results = compute_many(species_needed, descriptor_settings(settings), workers=workers, progress=progress,
                           store=store)
    estimates: dict[str, ElectrofugeEstimate | str] = {}
    for cation, needs in wanted.items():
        failed = [f"{role} {sp.smiles}: {results[sp].message}" for role, sp in needs.items()
                  if isinstance(results[sp], SpeciesFailure)]
        if failed:
            estimates[cation] = "; ".join(failed)
            continue
        estimates[cation] = _electrofuge_estimate(cation, {role: results[sp] for role, sp in needs.items()})
    out = [r if r.get("error") or not r.get("cation_smiles") else
           _with_rate(r, estimates[r["cation_smiles"]], m, temperature_k) for r in records]
    if task == "ladder":
        timed = sorted((r for r in out if r.get("half_life_s") is not None), key=lambda r: r["half_life_s"])
        rank_of = {id(r): rank for rank, r in enumerate(timed, 1)}
        out = [{**r, "half_life_rank": rank_of[id(r)]} if id(r) in rank_of else r for r in out]
    return out


def _with_rate(record: dict, est: ElectrofugeEstimate | str, m: Medium, temperature_k: float) -> dict:
    """A new record with the kinetic keys of its site (or why there is no rate); the verdict in time."""
    out = dict(record)
    if isinstance(est, str):
        out["rate_note"] = f"no rate: the E_f descriptor failed ({est})"
        return out
    try:
        nf = nucleofugality(record["leaving_group"], m)
    except InputError as exc:
        out.update({"medium": m.code, "k_ion_per_s": None, "half_life_s": None, "half_life_text": "—",
                    "rate_note": str(exc).split(";")[0] + " (no rate without it)"})
        return out
    fields = kinetic_fields(est, nf, m, record["substrate_smiles"], record["cation_class"], temperature_k)
    out.update(fields)
    if fields.get("rate_verdict"):  # words and numbers agree: with a rate, the verdict is about time
        out["equilibrium_verdict"], out["equilibrium_verdict_reason"] = out.get("verdict"), out.get("verdict_reason")
        out["verdict"], out["verdict_reason"] = fields["rate_verdict"], fields["rate_verdict_reason"]
    return out


def rate_footer(records: list[dict]) -> list[str]:
    """The lines a chemist needs under a rate table: equations, calibration, sources, verdict thresholds."""
    from cationcalc.chem.kinetics import half_life_rules

    timed = [r for r in records if not r.get("error") and r.get("medium") and r.get("E_f") is not None]
    if not timed:
        return []
    cal = electrofugality_calibration(timed[0].get("descriptor_level"))
    lines = [RATE_NOTE + ".",
             f"E_f computed from HIA at {cal.level}: E_f = {cal.a:.4f}·HIA {cal.b:+.2f} over {cal.n} benzhydrylium "
             f"ions (r {cal.r:.3f}, leave-one-out MAE {cal.loo_mae:.2f}, RMSE {cal.loo_rmse:.2f}); published E_f "
             "used where the cation is tabulated (E_f_source in --json).",
             "lg k uncertainty: E_f calibration (LOO RMSE × s_f), estimated N_f, the equation's ±16 %, the "
             "temperature band of ΔH‡ and, for classes outside the calibration, the class allowance, in quadrature."]
    sources = dict.fromkeys(f"N_f/s_f {r['leaving_group']} in {r['medium']}: {r['nucleofugality_source']}"
                            for r in timed)
    lines += list(sources)
    thresholds = "; ".join(f"≤ {human_time(float(r['limit_s']))} → {r['verdict']}" for r in half_life_rules()
                           if r["limit_s"] != "inf")
    lines.append(f"Time verdicts (half-life; cationcalc/data/half_life_verdicts.csv): {thresholds}; longer → "
                 f"{half_life_rules()[-1]['verdict']}.")
    return lines


def collate_rates(records: list[dict]) -> list[dict]:
    """Sites of one substrate, fastest first (outside-the-model sites after the others)."""
    ok = [r for r in records if not r.get("error")]
    failed = [r for r in records if r.get("error")]
    ok.sort(key=lambda r: (r.get("lg_k_ion") is None, -(r.get("lg_k_ion") or r.get("lg_k_ion_computed") or 0)))
    return [{**r, "rank": rank} for rank, r in enumerate(ok, 1)] + failed


def medium_rates(records: list[dict], options: dict, ctx: StepContext) -> list[dict]:
    """Step after collation (ionize, ladder): rate constants and half-lives when a ``medium`` is given."""
    if options.get("medium") is None:
        return records
    return add_rates(ctx.task, records, ctx.settings, options["medium"],
                     options.get("rate_temperature_k", ctx.settings.temperature_k), workers=ctx.workers,
                     store=ctx.store, progress=ctx.progress, force=ctx.force)


# ---------------------------------------------------------------- the task spec


def _known_media(value) -> list[str]:
    from cationcalc.chem.media import medium

    values = [value] if isinstance(value, str) else list(value or [])
    return [medium(str(v)).code for v in values]  # InputError (a ValueError) lists the known media


class RateOptions(TaskOptions):
    medium: list[str] = option(..., "solvolysis medium as the trade writes it: 80E20W, '80% ethanol', "
                                    "'ethanol/water 80:20', '97% TFE (w/w)', acetone, water", min_length=1)
    temperature_k: float = option(ELECTROFUGE_TEMPERATURE_K, "temperature in K for k and the half-life "
                                  "(273.15–423.15; default {default})", flag="--temperature")
    leaving_group: str = option("auto", "leaving group to break (chloride, bromide, …), or auto")

    _medium = field_validator("medium", mode="before")(classmethod(lambda cls, v: _known_media(v)))
    _temperature = field_validator("temperature_k")(classmethod(lambda cls, v: check_temperature(v)))


def _prepare(text: str, name: str, settings: Settings, options: dict, force: bool) -> list[Prepared]:
    options = rate_options(options)
    return prepare_rate(text, name, settings, medium=options["medium"], temperature_k=options["rate_temperature_k"],
                        leaving_group=options.get("leaving_group", "auto"), force=force)


def _collate(records: list[dict], settings: Settings) -> list[dict]:
    return collate_rates(records)


RATE = register(TaskSpec(
    name="rate", record=RateRecord,
    help="rate constant, half-life and cation lifetime of R–X in a solvolysis medium",
    options=RateOptions, headline="lg_k_ion",
    view=(SUBSTRATE, SITE, Column("medium", "medium"), HALF_LIFE, LG_K,
          Column("E_f", "E_f", "value", digits=2), Column("N_f", "N_f / s_f", get=nucleofugality_label),
          Column("lifetime_text", "cation lifetime"), Column("applicability_status", "model"), VERDICT),
    wide=(("name", "name"), ("substrate_smiles", "substrate"), ("leaving_group", "X"), ("medium", "medium"),
          ("k_ion_per_s", "k s⁻¹"), ("lg_k_ion_text", "lg k ± u"), ("half_life_text", "half-life"),
          ("half_life_range_text", "range (± u)"), ("E_f", "E_f"), ("N_f", "N_f"), ("s_f", "s_f"),
          ("lifetime_text", "cation lifetime"), ("applicability_status", "model"), ("verdict", "verdict")),
    title="ionization rate R–X → R⁺ + X⁻", report_title="how fast does it ionize? (rate, half-life)",
    prepare=_prepare, collate=_collate, fixed_level=descriptor_settings, one_pass_per="medium", level_options=False))


__all__ = ["RATE", "RateOptions", "medium_rates", "prepare_rate", "collate_rates", "add_rates", "rate_footer", "rate_options", "kinetic_fields", "lifetime_fields", "applicability", "rate_class",
           "tert_butyl_check", "descriptor_settings", "check_temperature", "UNCALIBRATED_CLASS_LG", "RATE_NOTE"]
