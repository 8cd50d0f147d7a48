"""Reading-view columns a task declares: the :class:`Column` record and the columns several tasks share.

A task's spec (:mod:`cationcalc.tasks.registry`) lists its reading view as a
tuple of columns; :mod:`cationcalc.report.columns` formats them for the
terminal and the report.

Example
-------
>>> from cationcalc.tasks.views import SITE, site_tier
>>> SITE.get({"site_atom": 3, "equivalent_atoms": [3, 5], "leaving_group": "hydride"})
'C3 (×2)–H'
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

@dataclass(frozen=True)
class Column:
    """One column of a reading view."""

    key: str  #: record key (or a name for a derived column)
    header: str  #: header in words, with units
    kind: str = "text"  #: text | smiles | value | factor | int
    error_key: str | None = None  #: record key of the ± error (value columns)
    digits: int = 1
    get: Callable[[dict], object] | None = None  #: derives the value when it is not one record key


def substrate_label(record: dict) -> str:
    from cationcalc.chem.species import clipped

    return record.get("name") or clipped(record.get("input") or "")


def _short_group(name: str) -> str:
    """A leaving group's short alias (Cl, OTs, OH2+) when it has one, else its name."""
    from cationcalc.chem.leaving_groups import library

    for g in library():
        if g.name == name:
            short = [a for a in g.aliases if len(a) <= 5]
            return short[0] if short else name
    return name


def _site(record: dict) -> str:
    atom = record.get("site_atom")
    group = record.get("leaving_group") or ""
    if atom is None:
        return group
    equivalent = record.get("equivalent_atoms") or [atom]
    where = f"C{atom}" + (f" (×{len(equivalent)})" if len(equivalent) > 1 else "")
    if group == "hydride":
        return f"{where}–H"
    return f"{where}–{_short_group(group)}" if group else where


def relaxed_label(record: dict) -> str:
    return record.get("relaxed_cation_smiles") or record.get("relaxed_smiles") or ""


#: site tiers of a ``sites`` scan (this project's labels and limits): a site whose gap to the best is
#: within the error of that gap, or within a factor 10 in the equilibrium constant (1.4 kcal/mol at
#: 298 K), is "leading"; within a factor 1000 (4.1 kcal/mol) "competing"; further away "minor"
SITE_TIERS = (("leading", 1.4), ("competing", 4.1), ("minor", float("inf")))


def site_tier(record: dict) -> str:
    """'leading', 'competing' or 'minor' from the gap to the best site and the error of that gap.

    >>> site_tier({"dG_ion_vs_best_kcal_mol": 3.0, "dG_ion_vs_best_uncertainty_kcal_mol": 3.2})
    'leading'
    >>> site_tier({"hia_vs_best_kcal_mol": 3.0, "hia_vs_best_uncertainty_kcal_mol": 0.5})
    'competing'
    """
    for stem in ("dG_ion", "hia"):
        gap = record.get(f"{stem}_vs_best_kcal_mol")
        if isinstance(gap, (int, float)):
            error = record.get(f"{stem}_vs_best_uncertainty_kcal_mol") or 0.0
            if gap <= error:
                return SITE_TIERS[0][0]
            return next(name for name, limit in SITE_TIERS if gap <= limit)
    return ""


SUBSTRATE = Column("substrate", "substrate", get=substrate_label)
SITE = Column("site", "site (atom–group)", get=_site)
CATION = Column("cation_smiles", "cation", "smiles")
VERDICT = Column("verdict", "verdict")
REARRANGEMENT = Column("rearrangement", "rearranges? (sink, ΔG kcal/mol, barrier)")
DG_ION = Column("dG_ion_kcal_mol", "ΔG_ion (kcal/mol)", "value", "dG_ion_uncertainty_kcal_mol")
DDG_ION = Column("ddG_ion_vs_tert_butyl_kcal_mol", "ΔΔG_ion vs t-Bu (kcal/mol)", "value",
                 "ddG_ion_vs_tert_butyl_uncertainty_kcal_mol")
HIA = Column("hia_kcal_mol", "HIA (kcal/mol)", "value", "hia_uncertainty_kcal_mol")
HALF_LIFE = Column("half_life_text", "half-life")
LG_K = Column("lg_k_ion_text", "lg k (s⁻¹) ± u")


def nucleofugality_label(record: dict) -> str:
    if record.get("N_f") is None:
        return ""
    return f"{record['N_f']:.2f} / {record['s_f']:.2f}" + (" (est.)" if record.get("nucleofugality_estimated") else "")


__all__ = ["Column", "SITE_TIERS", "site_tier", "substrate_label", "relaxed_label", "nucleofugality_label",
           "SUBSTRATE", "SITE", "CATION", "VERDICT", "REARRANGEMENT", "DG_ION", "DDG_ION", "HIA", "HALF_LIFE", "LG_K"]
