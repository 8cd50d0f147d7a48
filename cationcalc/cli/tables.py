"""The command line's tables: the reading view (default), every column (``--wide``), and the notes under them.

Columns, titles and headers come from the task specs (:mod:`cationcalc.tasks.registry`);
cells are formatted by :mod:`cationcalc.report.columns`.

Example
-------
>>> from cationcalc.cli.tables import COLUMNS
>>> dict(COLUMNS["hia"])["hia_kcal_mol"]
'HIA kcal/mol'
"""

from __future__ import annotations

import textwrap

from cationcalc.about import SAFETY_NOTE
from cationcalc.tasks.registry import SpecField, spec as task_spec

#: the --wide table's columns of each task, as its spec declares them (cationcalc.tasks.registry)
COLUMNS = SpecField("wide")


def anchors_text(records: list[dict]) -> str:
    """The anchor cation(s) the records' HIAs used, each with its value and source, in order of first use.

    >>> anchors_text([{"reference": "tert-butyl", "reference_hia_kcal_mol": 236.7, "reference_source": "K 1993"}])
    'the tert-butyl cation (HIA 236.7 kcal/mol, K 1993; status read)'
    """
    seen: dict[str, dict] = {}
    for r in records:
        seen.setdefault(r["reference"], r)
    parts = [f"the {name} cation (HIA {r['reference_hia_kcal_mol']} kcal/mol, {r['reference_source']}; "
             f"status {r.get('reference_status') or 'read'})" for name, r in seen.items()]
    text = " and ".join(parts) if len(parts) < 3 else ", ".join(parts[:-1]) + " and " + parts[-1]
    if len(parts) > 1 or any(r.get("reference_choice") == "nearest class" and r.get("refine_level") for r in records):
        from cationcalc.chem.reference import class_anchor_rule

        text += f" (nearest-class anchor for DFT-refined values: {class_anchor_rule()}; 'reference' in --json)"
    return text


def _ionization_footer(task: str, records: list[dict]) -> list[str]:
    """The notes a chemist needs beside an ionization table: model, caveats, verdict rules, sources."""
    from cationcalc.chem.ionization import verdict_rules

    ok = [r for r in records if not r.get("error")]
    if not ok:
        return []
    first = ok[0]
    lines = []
    if "dG_ion_kcal_mol" in first:
        references = {r.get("reference_substrate") for r in ok}
        against = (references.pop() if len(references) == 1
                   else "the tert-butyl substrate with the same leaving group (reference_substrate in --json)")
        lines.append(f"ΔG_ion: R–X → R⁺ + X at {first['level']}, standard state {first['standard_state']}; "
                     f"ΔΔG_ion against {against}.")
        lines.append(first["equilibrium_note"] + ".")
        if first.get("solvation_note"):
            lines.append(first["solvation_note"][0].upper() + first["solvation_note"][1:] + ".")
    if "hia_kcal_mol" in first:
        lines.append("HIA by isodesmic hydride exchange with " + anchors_text(ok) + ".")
    if task == "ladder":
        lines.append(first["ladder_note"] + ".")
        if first.get("spearman_rho_vs_solvolysis") is not None:
            lines.append(f"Spearman ρ(−ΔG_ion, lg k_rel) = {first['spearman_rho_vs_solvolysis']:+.2f} over "
                         f"{first['solvolysis_n']} groups; k_rel: {first['solvolysis_source']}; "
                         f"status {first.get('solvolysis_status') or 'read'}.")
    rules = verdict_rules()
    quantity, label = ("ddG_ion", "ΔΔG_ion vs tert-butyl") if "dG_ion_kcal_mol" in first else ("dHIA", "ΔHIA vs tert-butyl")
    thresholds = "; ".join(f"{label} ≤ {r['limit_kcal_mol']} → {r['verdict']}" for r in rules
                           if r["kind"] == "threshold" and r["key"] == quantity and r["limit_kcal_mol"] != "inf")
    flagged = ", ".join(r["key"] for r in rules if r["kind"] == "class")
    text = (f"Verdict rules (kcal/mol; cationcalc/data/ionization_verdicts.csv): {flagged} cations are "
            f"SN1-implausible by structure (unless ΔG_ion ≤ 0); {thresholds}; above that SN1-implausible")
    if quantity == "ddG_ion":
        poor = next(r for r in rules if r["key"] == "dG_ion_solution")
        text += f"; in solution ΔG_ion > {poor['limit_kcal_mol']} → {poor['verdict']}"
    lines.append(text + (". Flagged and non-minimum cations rank last." if task != "ionize" else "."))
    return lines


def _title(task: str, first: dict) -> str:
    title = task_spec(task).title
    if task == "rate":
        return f"{title} — E_f from HIA at {first.get('level', '')}, k at {first.get('rate_temperature_k')} K"
    return f"{title} — {first.get('level', '')}, {first.get('temperature_k', 298.15)} K"


def _print_view(task: str, records: list[dict]) -> None:
    """The default table: the task's reading view (cationcalc/columns.py), one short note per row."""
    from rich.console import Console
    from rich.markup import escape
    from rich.table import Table

    from cationcalc.report.columns import cell, note, view
    from cationcalc.chem.species import shown

    console = Console(width=max(120, Console().width))
    first = records[0] if records else {}
    table = Table(title=_title(task, first), title_justify="left")
    columns = view(task, records)
    # widths are fixed here, not left to the table: SMILES and numbers are never wrapped inside a token
    # (too long a SMILES ends in "…", the full one is in --json); text wraps between words only, and a
    # terminal narrower than the narrowest layout gets the table at its own width instead of a cropped one
    notes = [note(r) for r in records]
    specs = []  # (header, narrowest, widest, wraps, justify)
    for column in columns:
        texts = [cell(column, r) for r in records]
        wrap = column.kind == "text"
        widest = max([len(t) for t in texts] + [1])
        longest_word = max([len(w) for t in texts for w in t.split()] + [1])
        narrowest = max(min(longest_word, 40) if wrap else widest, 6)
        header = "\n".join(textwrap.wrap(column.header, max(narrowest, 10), break_long_words=False,
                                         break_on_hyphens=False))
        narrowest = max(narrowest, *(len(line) for line in header.split("\n")))
        specs.append([column.header, narrowest, max(widest, narrowest), wrap,
                      "right" if column.kind in ("value", "int", "factor") else "left"])
    note_width = max([len(n) + (1 + len(str(len(records))) if n.startswith("error") else 0) for n in notes] + [4])
    needed = sum(spec[1] + 3 for spec in specs) + note_width + 3 + 1
    console = Console(width=max(console.width, needed))
    spare = console.width - needed
    for spec in specs:  # give the room left to the text columns, up to their widest line
        if spec[3] and spare > 0:
            extra = min(spare, spec[2] - spec[1])
            spec[1] += extra
            spare -= extra
    for header, width, _, wrap, justify in specs:
        lines = textwrap.wrap(header, max(width, 10), break_long_words=False, break_on_hyphens=False)
        table.add_column("\n".join(lines), no_wrap=not wrap, overflow="ellipsis", width=width, justify=justify)
    table.add_column("note", no_wrap=True, width=note_width)
    errors: list[str] = []
    for r in records:
        flag = note(r)
        if r.get("error"):
            errors.append(f"{r.get('name') or shown(r.get('input', ''))}: {r['error']}")
            flag = flag.replace("error", f"[red]error {len(errors)}[/red]", 1)
        table.add_row(*[escape(cell(c, r)) for c in columns], flag)
    console.print(table)
    for i, message in enumerate(errors, 1):
        console.print(f"[red]error {i}[/red]: {escape(message)}", highlight=False)
    if any(r.get("warnings") for r in records):
        console.print("Notes: the diagnostics behind each count are in --json (warnings); --wide prints every "
                      "column and note.", highlight=False)
    _print_footer(console, task, records, first)


def _print_table(task: str, records: list[dict]) -> None:
    from rich.console import Console
    from rich.markup import escape
    from rich.table import Table

    from cationcalc.chem.species import clipped, shown
    from cationcalc.trust.uncertainty import format_value

    console = Console(width=max(120, Console().width))
    first = records[0] if records else {}
    table = Table(title=_title(task, first), title_justify="left")
    # columns nobody has a value for are left out (e.g. HIA columns of a leaving-group site scan)
    columns = [(key, header) for key, header in COLUMNS[task]
               if key in ("cation_smiles", "substrate_smiles", "smiles")
               or any(r.get(key) not in (None, "", []) for r in records)]
    for key, header in columns:
        table.add_column(header, overflow="fold")
    table.add_column("notes")
    errors: list[str] = []
    for r in records:
        row = []
        for key, _ in columns:
            value = r.get(key, clipped(r.get("input", ""))
                          if key in ("cation_smiles", "substrate_smiles", "smiles") else "")
            spread = r.get(key.replace("_kcal_mol", "_uncertainty_kcal_mol")) if key.endswith("_kcal_mol") else None
            if isinstance(value, (int, float)) and spread is not None:
                value = format_value(value, spread, digits=1)  # e.g. 233.4 ± 6.1
            row.append("" if value is None else escape(str(value)))
        notes = []
        if r.get("error"):
            notes.append(f"[red]error {len(errors) + 1} (below)[/red]")
            errors.append(f"{shown(r.get('input', ''))}: {r['error']}")
        if r.get("rearranged"):
            relaxed = r.get("relaxed_cation_smiles") or r.get("relaxed_smiles") or "a bridged structure"
            notes.append(f"[yellow]relaxed to {escape(relaxed)}[/yellow]")
        notes += [escape(w) for w in r.get("warnings", [])]
        notes += [escape(n) for n in r.get("kinetic_notes", []) if not n.startswith("medium ")]
        if task in ("ionize", "sites", "ladder") and r.get("verdict") not in (None, "SN1/E1 plausible", "borderline"):
            notes.insert(0, escape(r["verdict_reason"]))
        table.add_row(*row, "\n".join(notes))
    console.print(table)
    for i, message in enumerate(errors, 1):
        console.print(f"[red]error {i}[/red]: {escape(message)}", highlight=False)
    _print_footer(console, task, records, first)


def _print_footer(console, task: str, records: list[dict], first: dict) -> None:
    from rich.markup import escape

    if task in ("ionize", "sites", "ladder"):
        for line in _ionization_footer(task, records):
            console.print(escape(line), highlight=False)
    if task == "rate" or any(r.get("medium") for r in records):
        from cationcalc.tasks.rate import rate_footer

        for line in rate_footer(records):
            console.print(escape(line), highlight=False)
    if task == "hia" and first.get("reference"):
        console.print(escape(f"Anchor: {anchors_text([r for r in records if r.get('reference')])}. "
                             "HIA = ΔH298 of R⁺ + H⁻ → R–H by isodesmic hydride exchange."), highlight=False)
    if task == "heterolysis":
        console.print("Standard state: 1 atm in the gas phase, 1 mol/L in solution (1 atm → 1 M applied once per species).")
    if task == "shifts":
        console.print("ΔG = G(product) − G(parent), kcal/mol; a shift is flagged when ΔG < −"
                      f"{first.get('threshold_kcal_mol', task_spec('shifts').defaults()['threshold_kcal_mol'])}; ⇒ marks a barrierless step (a structure that is not a "
                      "minimum); the highest point of the path is a lower bound to its barrier (--json: barriers).")
    console.print(f"[dim]{SAFETY_NOTE}[/dim]")


def _write_csv(records: list[dict]) -> str:
    from cationcalc.report.outputs import csv_text

    return csv_text(records)


__all__ = ["COLUMNS", "_print_view", "_print_table", "_write_csv"]
