"""What a chemist reads first: a short column list per task, shared by the terminal and report.html.

``VIEWS[task]`` is a tuple of :class:`Column` (record key, header in words
with units, how to format it, and which key holds its ± error).  The
terminal's default table and the report's per-task tables use it; the full
record stays in ``--json``, results.json and results.csv, and ``--wide``
prints every column.  A new task (or a new quantity) is one more entry in
``VIEWS``; :func:`cell` formats any column of any record.

Diagnostics (optimiser and mode-following remarks, warnings of the species
behind a record) are counted in one short flag by :func:`note`
("3 notes"); their text is in the record's ``warnings``.

Example
-------
>>> from cationcalc.report.columns import VIEWS, cell, note
>>> record = {"name": "1-phenylethyl chloride", "dG_ion_kcal_mol": 15.04, "dG_ion_uncertainty_kcal_mol": 18.2,
...           "warnings": ["a", "b"], "rearranged": False}
>>> column = next(c for c in VIEWS["ionize"] if c.key == "dG_ion_kcal_mol")
>>> column.header, cell(column, record)
('ΔG_ion (kcal/mol)', '15.0 ± 18.2')
>>> note(record)
'2 notes'
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

#: longest SMILES shown in a table cell; a longer one ends in "…" (the full one is in JSON/CSV)
SMILES_WIDTH = 28


@dataclass(frozen=True)
class Column:
    """One column of a reading view."""

    key: str  #: record key (or a name for a derived column)
    header: str  #: header in words, with units
    kind: str = "text"  #: text | smiles | value | factor | int
    error_key: str | None = None  #: record key of the ± error (value columns)
    digits: int = 1
    get: Callable[[dict], object] | None = None  #: derives the value when it is not one record key


def _substrate(record: dict) -> str:
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


def _relaxed(record: dict) -> str:
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


SUBSTRATE = Column("substrate", "substrate", get=_substrate)
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


def _nucleofugality(record: dict) -> str:
    if record.get("N_f") is None:
        return ""
    return f"{record['N_f']:.2f} / {record['s_f']:.2f}" + (" (est.)" if record.get("nucleofugality_estimated") else "")

#: the reading view of each task; a new task adds one entry
VIEWS: dict[str, tuple[Column, ...]] = {
    "hia": (SUBSTRATE, CATION, HIA,
            Column("hia_G_kcal_mol", "ΔG-HIA (kcal/mol)", "value", "hia_G_uncertainty_kcal_mol"),
            Column("relaxed", "relaxed to", "smiles", get=_relaxed)),
    "heterolysis": (SUBSTRATE, Column("leaving_group", "leaving group"),
                    Column("dG_het_kcal_mol", "ΔG_het (kcal/mol)", "value", "dG_het_uncertainty_kcal_mol"),
                    Column("dH_het_kcal_mol", "ΔH_het (kcal/mol)", "value", "dH_het_uncertainty_kcal_mol")),
    "thermo": (Column("smiles", "species", "smiles"), Column("G_kcal_mol", "G − E (kcal/mol)", "value", digits=2),
               Column("S_J_mol_K", "S (J/mol/K)", "value"), Column("point_group", "point group")),
    "ionize": (SUBSTRATE, SITE, CATION, DG_ION, DDG_ION, HALF_LIFE, VERDICT, REARRANGEMENT),
    "sites": (SUBSTRATE, Column("rank", "rank", "int"), Column("tier", "site tier", get=site_tier), SITE, CATION,
              DG_ION,
              Column("dG_ion_vs_best_kcal_mol", "ΔG_ion − best (kcal/mol)", "value",
                     "dG_ion_vs_best_uncertainty_kcal_mol"),
              HIA, Column("hia_vs_best_kcal_mol", "HIA − best (kcal/mol)", "value", "hia_vs_best_uncertainty_kcal_mol"),
              VERDICT, REARRANGEMENT),
    "ladder": (SUBSTRATE, Column("rank", "rank", "int"), Column("leaving_group", "leaving group"), DG_ION,
               Column("dG_ion_vs_best_kcal_mol", "ΔG_ion − best (kcal/mol)", "value"),
               Column("solvolysis_k_rel", "published k_rel (solvolysis)", "factor"),
               Column("half_life_rank", "rank by rate", "int"), HALF_LIFE, LG_K, VERDICT),
    "rate": (SUBSTRATE, SITE, Column("medium", "medium"), HALF_LIFE, LG_K,
             Column("E_f", "E_f", "value", digits=2), Column("N_f", "N_f / s_f", get=_nucleofugality),
             Column("lifetime_text", "cation lifetime"), Column("applicability_status", "model"), VERDICT),
    "shifts": (SUBSTRATE, CATION, Column("sink_smiles", "most stable cation reached", "smiles"),
               Column("sink_dG_kcal_mol", "ΔG to it (kcal/mol)", "value"),
               Column("path_highest_kcal_mol", "highest point (kcal/mol)", "value"),
               Column("degenerate", "degenerate shifts", get=lambda r: ", ".join(r.get("degenerate_shifts") or []))),
}


def value_of(column: Column, record: dict):
    return column.get(record) if column.get else record.get(column.key)


def short_smiles(smiles: str, width: int = SMILES_WIDTH) -> str:
    """A SMILES that fits ``width`` characters, cut with "…" (never wrapped inside a token)."""
    return smiles if len(smiles) <= width else smiles[:width - 1] + "…"


def cell(column: Column, record: dict, *, shorten: bool = True) -> str:
    """The text of one cell ('' when the record has no value)."""
    value = value_of(column, record)
    if value is None or value == "" or value == []:
        return ""
    if column.kind == "value" and isinstance(value, (int, float)):
        text = f"{value:.{column.digits}f}"
        error = record.get(column.error_key) if column.error_key else None
        if isinstance(error, (int, float)):
            text += f" ± {error:.{column.digits}f}"
        return text.replace("-", "−")
    if column.kind == "factor" and isinstance(value, (int, float)):
        return f"{value:.2g}"
    if column.kind == "smiles":
        return short_smiles(str(value)) if shorten else str(value)
    return str(value)


def note(record: dict) -> str:
    """One short note: an error, a structure that relaxed, and how many diagnostics the record carries."""
    parts = []
    if record.get("error"):
        parts.append("error")
    if record.get("rearranged"):
        parts.append(f"relaxed to {short_smiles(_relaxed(record) or 'a bridged structure', 24)}")
    count = len(record.get("warnings") or [])
    if count:
        parts.append(f"{count} note{'s' if count > 1 else ''}")
    return "; ".join(parts)


def view(task: str, records: list[dict]) -> list[Column]:
    """The task's columns that at least one record has a value for (substrate always)."""
    columns = VIEWS.get(task, (SUBSTRATE,))
    return [c for c in columns if c is SUBSTRATE or any(value_of(c, r) not in (None, "", []) for r in records)]


__all__ = ["Column", "VIEWS", "SITE_TIERS", "site_tier", "cell", "note", "view", "short_smiles", "value_of", "SMILES_WIDTH"]
