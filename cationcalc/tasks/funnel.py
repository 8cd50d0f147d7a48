"""The funnel: rank ionization sites and shift products at the screening level, compute in full only what can win.

A drug-like substrate has several sites (each leaving group, each protonatable
oxygen) and each cation several 1,2-shift products, all as large as the
substrate.  Every one of them through the full protocol (conformer search,
optimisation of several conformers, Hessians) is what makes such a substrate
take minutes.  The funnel first computes every species at the screening level
(:meth:`~cationcalc.compute.models.Settings.screening`: the lowest
single-point conformer, a loose optimisation, no Hessian) and ranks by the
electronic reaction energy:

* sites by ΔE_ion = E(cation) + E(leaving group) − E(substrate) (hydride
  abstraction: E(cation) − E(hydride adduct)), within the tiers the ranking
  itself uses (a structurally flagged cation or one that is not a minimum
  cannot win over a stabilized one); only the sites of the best tier within
  ``site_window_kcal_mol`` of its best get the full protocol, the others are
  reported as screened out with their screening ΔE;
* shift products by ΔE = E(product) − E(cation); only those at most
  ``shift_window_kcal_mol`` above their cation are computed in full (a shift
  is flagged when its ΔG is below −threshold, so a product this far uphill
  at the screening level cannot be flagged unless the screening error
  exceeds the window).

The windows were chosen by measurement on the drug-like set
(benchmarks/druglike.py: the largest gap between the screening ΔE of the
site the full protocol chose and the best screening ΔE, plus a margin); a
window of None puts everything through the full protocol.

Example
-------
>>> site_score({"cation": -10.0, "departing": -5.0, "substrate": -16.0})
1.0
>>> inside_window({"a": 0.0, "b": 2.5, "c": 9.0}, 6.0)
['a', 'b']
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Callable

from cationcalc.chem import units
from cationcalc.chem.shift_graph import enumerate_shifts
from cationcalc.chem.species import InputError, Species
from cationcalc.compute.models import Settings, SpeciesResult
from cationcalc.execution.executors import Interrupted, SpeciesFailure, compute_many
from cationcalc.tasks.records import Prepared

#: sites whose screening ΔE_ion is more than this above the best site's are not computed in full (kcal/mol)
DEFAULT_SITE_WINDOW_KCAL_MOL = 8.0
#: shift products more than this above their cation at the screening level are not computed in full (kcal/mol)
DEFAULT_SHIFT_WINDOW_KCAL_MOL = 6.0

#: roles of a request on each side of the reaction the site is ranked by
PRODUCT_ROLES = ("cation", "departing")
REACTANT_ROLES = ("substrate", "adduct")


@dataclass(frozen=True)
class ScreenedOut(SpeciesFailure):
    """A species the funnel did not compute in full: its screening energy relative to the best or its parent."""

    above_kcal_mol: float = 0.0


def site_score(energies: dict[str, float]) -> float:
    """The electronic reaction energy of a request from its roles' energies (products minus reactants)."""
    return (sum(energies[r] for r in PRODUCT_ROLES if r in energies)
            - sum(energies[r] for r in REACTANT_ROLES if r in energies))


def inside_window(scores: dict, window_kcal_mol: float) -> list:
    """The keys whose score is at most ``window_kcal_mol`` above the lowest, in their order."""
    best = min(scores.values())
    return [k for k, v in scores.items() if v - best <= window_kcal_mol]


def _screen(species: list[Species], settings: Settings, ctx: dict) -> dict[Species, SpeciesResult]:
    """Results at the screening level of every species (failures left out)."""
    if not species:
        return {}
    try:
        results = compute_many(species, settings.screening(), workers=ctx.get("workers", 1),
                               store=ctx.get("store"), progress=ctx.get("progress"))
    except Interrupted as exc:
        results = exc.results
    return {sp: r for sp, r in results.items() if isinstance(r, SpeciesResult)}


def _kcal(result: SpeciesResult) -> float:
    return result.E_hartree * units.HARTREE_TO_KCAL_MOL


def _scoring_roles(p: Prepared) -> dict[str, Species]:
    return {role: sp for role, sp in p.needs.items() if role in PRODUCT_ROLES + REACTANT_ROLES}


#: (prepared request, its screening results by role) → tier: a site of a higher tier cannot win over one of a
#: lower tier whatever its energy (e.g. a structurally flagged cation, a cation that is not a minimum)
Tier = Callable[[Prepared, dict[str, SpeciesResult]], tuple]


def funnel_sites(groups: list[list[Prepared]], settings: Settings, window_kcal_mol: float | None, ctx: dict,
                 screened_record: Callable[[Prepared, float, float, bool], dict],
                 tier: Tier = lambda p, results: ()) -> list[list[Prepared]]:
    """Each input's requests with the sites that cannot win replaced by a screened-out request.

    Kept: the sites of the best tier within ``window_kcal_mol`` of that tier's best screening energy.
    Inputs with one site (or a window of None) pass unchanged; a site whose screening failed stays in
    (the full protocol then says why).  ``screened_record(prepared, dE_screen, above_best, outranked)``
    builds the record of a screened-out site (``outranked``: by tier, not by energy).
    """
    if window_kcal_mol is None:
        return groups
    several = [sum(p.error is None for p in g) > 1 for g in groups]
    wanted = [sp for g, many in zip(groups, several) if many for p in g if p.error is None
              for sp in _scoring_roles(p).values()]
    screened = _screen(list(dict.fromkeys(wanted)), settings, ctx)
    out = []
    for group, many in zip(groups, several):
        if not many:
            out.append(group)
            continue
        ranks = {}
        for i, p in enumerate(group):
            roles = _scoring_roles(p)
            if p.error is None and all(sp in screened for sp in roles.values()):
                results = {r: screened[sp] for r, sp in roles.items()}
                ranks[i] = (tier(p, results), site_score({r: _kcal(res) for r, res in results.items()}))
        best_tier = min(t for t, _ in ranks.values()) if ranks else ()
        best = min((v for t, v in ranks.values() if t == best_tier), default=0.0)
        keep = set(inside_window({i: v for i, (t, v) in ranks.items() if t == best_tier}, window_kcal_mol)
                   if ranks else [])
        out.append([p if i not in ranks
                    else _with_screening(p, ranks[i][1], ranks[i][1] - best) if i in keep
                    else _screened_out(p, ranks[i][1], ranks[i][1] - best, ranks[i][0] != best_tier, screened_record)
                    for i, p in enumerate(group)])
    return out


def _with_screening(p: Prepared, score: float, gap: float) -> Prepared:
    """A kept request whose record also says where it stood at the screening level."""
    finish = p.finish
    extra = {"screen_gap_kcal_mol": round(gap, 2),
             **({"dE_ion_screen_kcal_mol": round(score, 2)} if "substrate" in p.needs else {})}
    return replace(p, finish=lambda results: {**finish(results), **extra})


def _screened_out(p: Prepared, score: float, above: float, outranked: bool,
                  build: Callable[[Prepared, float, float, bool], dict]) -> Prepared:
    record = build(p, score, above, outranked)
    return replace(p, needs={}, finish=lambda results: dict(record))


def shift_products(cations: list[str]) -> dict[str, list[str]]:
    """Product SMILES → the cations (of ``cations``) one 1,2-shift away from it (degenerate shifts left out)."""
    parents: dict[str, list[str]] = {}
    for cation in cations:
        try:
            candidates = enumerate_shifts(cation)
        except InputError:
            continue
        for cand in candidates:
            if not cand.degenerate:
                parents.setdefault(cand.product_smiles, []).append(cation)
    return parents


def funnel_shift_products(products: list[Species], parents: dict[str, list[str]], settings: Settings,
                          window_kcal_mol: float | None, ctx: dict) -> tuple[list[Species], dict[Species, ScreenedOut]]:
    """(products to compute in full, products screened out) for one round of the shift screen.

    A product stays when it is at most the window above any of its parent cations at the screening level,
    or when its screening (or its parents') failed.
    """
    if window_kcal_mol is None or not products:
        return products, {}
    parent_species = {Species(c, 1, 1) for sp in products for c in parents.get(sp.smiles, [])}
    energies = {sp: _kcal(r) for sp, r in _screen(
        list(dict.fromkeys([*products, *sorted(parent_species, key=lambda s: s.smiles)])), settings, ctx).items()}
    full, screened = [], {}
    for sp in products:
        gaps = [energies[sp] - energies[Species(c, 1, 1)] for c in parents.get(sp.smiles, [])
                if sp in energies and Species(c, 1, 1) in energies]
        if not gaps or min(gaps) <= window_kcal_mol:
            full.append(sp)
            continue
        above = min(gaps)
        screened[sp] = ScreenedOut(f"screened out: {above:+.1f} kcal/mol above its cation at the screening level "
                                   f"(ΔE, {settings.screening().level}, one conformer, no Hessian), beyond the "
                                   f"{window_kcal_mol:g} kcal/mol window; not computed in full", above)
    return full, screened


__all__ = ["ScreenedOut", "funnel_sites", "funnel_shift_products", "shift_products", "site_score", "inside_window",
           "DEFAULT_SITE_WINDOW_KCAL_MOL", "DEFAULT_SHIFT_WINDOW_KCAL_MOL"]
