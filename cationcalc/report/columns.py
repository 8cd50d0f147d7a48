"""What a chemist reads first: a short column list per task, shared by the terminal and report.html.

``VIEWS[task]`` is a tuple of :class:`Column` (record key, header in words
with units, how to format it, and which key holds its ± error), as the
task's spec declares it (:mod:`cationcalc.tasks.registry`).  The
terminal's default table and the report's per-task tables use it; the full
record stays in ``--json``, results.json and results.csv, and ``--wide``
prints every column.  A new task declares its view in its spec;
:func:`cell` formats any column of any record.

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

from typing import Any

from cationcalc.tasks.registry import SpecField
from cationcalc.tasks.views import (SITE_TIERS, SUBSTRATE, VERDICT, Column, relaxed_label,  # noqa: F401
                                    site_tier)

#: longest SMILES shown in a table cell; a longer one ends in "…" (the full one is in JSON/CSV)
SMILES_WIDTH = 28


#: the reading view of each task, as its spec declares it (cationcalc.tasks.registry)
VIEWS = SpecField("view")


def value_of(column: Column, record: dict) -> Any:
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
        parts.append(f"relaxed to {short_smiles(relaxed_label(record) or 'a bridged structure', 24)}")
    count = len(record.get("warnings") or [])
    if count:
        parts.append(f"{count} note{'s' if count > 1 else ''}")
    return "; ".join(parts)


def view(task: str, records: list[dict]) -> list[Column]:
    """The task's columns that at least one record has a value for (substrate always)."""
    columns = VIEWS.get(task, (SUBSTRATE,))
    return [c for c in columns if c is SUBSTRATE or any(value_of(c, r) not in (None, "", []) for r in records)]


__all__ = ["Column", "VIEWS", "SITE_TIERS", "site_tier", "cell", "note", "view", "short_smiles", "value_of", "SMILES_WIDTH"]
