"""The ``cationcalc`` command line.

    cationcalc hia "C[C+](C)C" "[CH2+]c1ccccc1" --solvent water
    cationcalc heterolysis "CC(C)(C)Cl" --json
    cationcalc thermo "C" "[Cl-]" --temperature 298.15
    cationcalc ionize "CC(Cl)c1ccccc1" "CC(C)(C)O" --acid --solvent water
    cationcalc sites "CC(C)CC"
    cationcalc ladder "CC(*)c1ccccc1" --solvent water --medium 80E20W
    cationcalc rate "ClC(c1ccccc1)c1ccccc1" "CC(C)(C)Cl" --medium "80% ethanol"

Inputs come as arguments or from ``-i FILE`` (one SMILES per line with an
optional name after whitespace; ``-`` reads standard input).  A terminal gets
a table; ``--json`` and ``--csv`` are for machines.  Exit status: 0 when every
input succeeded, 1 when some failed (the others are still printed), 2 for bad
usage, 130 when interrupted, 143 when stopped by SIGTERM (finished records are
still printed).
"""

from __future__ import annotations

import argparse
import json
import re
import sys
import textwrap

from cationcalc.about import SAFETY_NOTE, __version__


def _read_inputs(args) -> list[tuple[str, str]]:
    items: list[tuple[str, str]] = [(s, "") for s in args.smiles]
    if args.input:
        if args.input == "-":
            raw = sys.stdin.buffer.read()
            where = "standard input"
        else:
            try:
                with open(args.input, "rb") as handle:
                    raw = handle.read()
            except OSError as exc:
                raise SystemExit(_usage_error(f"cannot read input file {args.input!r}: {exc.strerror}; "
                                              "give an existing file with one SMILES per line"))
            where = args.input
        try:
            text = raw.decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            raise SystemExit(_usage_error(f"{where} is not UTF-8 text (byte {exc.start}); save it as UTF-8"))
        for line in text.splitlines():
            stripped = line.strip()
            if not stripped or stripped.startswith("#"):
                continue
            parts = stripped.split(None, 1)
            items.append((parts[0], parts[1].strip() if len(parts) > 1 else ""))
    return items


def _level_among_smiles(smiles: list[str]) -> str | None:
    """A positional input that is no SMILES but reads like a DFT level (``--refine HF/STO-3G``), or None."""
    from rdkit import Chem

    from cationcalc.chem import species as _species  # noqa: F401  (RDKit stays quiet)

    for text in smiles:
        if "/" in text and Chem.MolFromSmiles(text) is None and re.match(r"^[A-Za-z0-9()+\-]+/[A-Za-z0-9*+()/\-]+$", text):
            return text
    return None


def _usage_error(message: str) -> int:
    print(f"cationcalc: error: {message}", file=sys.stderr)
    return 2


def _settings(args):
    from cationcalc.chem.conformers import ConformerSettings
    from cationcalc.compute.models import Settings

    conformer_options = {}
    if args.conformers is not None:
        conformer_options["max_conformers"] = args.conformers
    return Settings(engine=args.engine, solvent=args.solvent, temperature_k=args.temperature,
                    pressure_pa=args.pressure, conformers=ConformerSettings(**conformer_options),
                    qrrho=not args.rrho, enantiomer_mixing=args.mix_enantiomers)


COLUMNS = {
    "hia": [("name", "name"), ("cation_smiles", "cation"), ("hia_kcal_mol", "HIA kcal/mol"),
            ("hia_xtb_kcal_mol", "HIA GFN2-xTB"),
            ("hia_kJ_mol", "HIA kJ/mol"), ("hia_G_kcal_mol", "ΔG-HIA kcal/mol")],
    "heterolysis": [("name", "name"), ("substrate_smiles", "substrate"), ("leaving_group", "X"),
                    ("dE_het_kcal_mol", "ΔE"), ("dH_het_kcal_mol", "ΔH"), ("dG_het_kcal_mol", "ΔG kcal/mol"),
                    ("dG_het_xtb_kcal_mol", "ΔG GFN2-xTB"),
                    ("dG_het_kJ_mol", "ΔG kJ/mol")],
    "thermo": [("smiles", "species"), ("E_hartree", "E/Eh"), ("zpe_kcal_mol", "ZPE kcal/mol"),
               ("H_kcal_mol", "H−E kcal/mol"), ("S_J_mol_K", "S J/mol/K"), ("G_kcal_mol", "G−E kcal/mol"), ("point_group", "group"),
               ("symmetry_number", "σ"), ("imaginary_frequencies_cm1", "imag. cm⁻¹")],
    "ionize": [("name", "name"), ("substrate_smiles", "substrate"), ("leaving_group", "X"), ("site_atom", "atom"),
               ("cation_class", "cation"), ("dG_ion_kcal_mol", "ΔG_ion kcal/mol"),
               ("dG_ion_xtb_kcal_mol", "ΔG_ion GFN2-xTB"), ("ddG_ion_kcal_mol", "ΔΔG_ion"),
               ("equilibrium_factor", "K/K_ref (equilibrium)"), ("half_life_text", "half-life"),
               ("verdict", "verdict"),
               ("shift_summary", "downhill 1,2-shift (ΔG)")],
    "sites": [("name", "name"), ("rank", "#"), ("site_atom", "atom"), ("equivalent_atoms", "equivalent"),
              ("leaving_group", "X"), ("cation_smiles", "cation"), ("cation_class", "class"),
              ("dG_ion_kcal_mol", "ΔG_ion kcal/mol"), ("dG_ion_vs_best_kcal_mol", "Δ vs #1"),
              ("hia_kcal_mol", "HIA kcal/mol"), ("hia_vs_best_kcal_mol", "Δ vs #1"), ("verdict", "verdict"),
              ("shift_summary", "downhill 1,2-shift (ΔG)")],
    "ladder": [("name", "name"), ("rank", "#"), ("leaving_group", "leaving group"),
               ("substrate_smiles", "substrate"), ("dG_ion_kcal_mol", "ΔG_ion kcal/mol"),
               ("dG_ion_vs_best_kcal_mol", "Δ vs #1"), ("solvolysis_k_rel", "k_rel (solvolysis)"),
               ("half_life_rank", "# by rate"), ("half_life_text", "half-life"), ("lg_k_ion", "lg k"),
               ("verdict", "verdict")],
    "rate": [("name", "name"), ("substrate_smiles", "substrate"), ("leaving_group", "X"), ("medium", "medium"),
             ("k_ion_per_s", "k s⁻¹"), ("lg_k_ion_text", "lg k ± u"), ("half_life_text", "half-life"),
             ("half_life_range_text", "range (± u)"), ("E_f", "E_f"), ("N_f", "N_f"), ("s_f", "s_f"),
             ("lifetime_text", "cation lifetime"), ("applicability_status", "model"), ("verdict", "verdict")],
    "shifts": [("name", "name"), ("cation_smiles", "cation"), ("parent_relaxation", "as optimised"),
               ("flagged_summary", "downhill 1,2-shifts (ΔG kcal/mol)"), ("sink_smiles", "sink"),
               ("sink_dG_kcal_mol", "ΔG to sink"), ("path_text", "path"),
               ("path_highest_kcal_mol", "highest point")],
}

TITLES = {"hia": "hydride-ion affinity", "heterolysis": "heterolysis R–X → R⁺ + X⁻", "thermo": "thermochemistry",
          "ionize": "ionization R–X → R⁺ + X", "sites": "ionization sites", "ladder": "leaving-group ladder",
          "shifts": "1,2-shifts and rearrangements", "rate": "ionization rate R–X → R⁺ + X⁻"}


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
        lines.append(f"HIA by isodesmic hydride exchange with the {first['reference']} cation "
                     f"(HIA {first['reference_hia_kcal_mol']} kcal/mol, {first['reference_source']}; "
                     f"status {first.get('reference_status') or 'read'}).")
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
    if task == "rate":
        return f"{TITLES[task]} — E_f from HIA at {first.get('level', '')}, k at {first.get('rate_temperature_k')} K"
    return f"{TITLES[task]} — {first.get('level', '')}, {first.get('temperature_k', 298.15)} K"


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
        console.print(f"Anchor: {first['reference']} cation, HIA {first['reference_hia_kcal_mol']} kcal/mol "
                      f"({first['reference_source']}; status {first.get('reference_status') or 'read'}). HIA = ΔH298 of R⁺ + H⁻ → R–H by isodesmic hydride exchange.")
    if task == "heterolysis":
        console.print("Standard state: 1 atm in the gas phase, 1 mol/L in solution (1 atm → 1 M applied once per species).")
    if task == "shifts":
        console.print("ΔG = G(product) − G(parent), kcal/mol; a shift is flagged when ΔG < −"
                      f"{first.get('threshold_kcal_mol', 1.0)}; ⇒ marks a barrierless step (a structure that is not a "
                      "minimum); the highest point of the path is a lower bound to its barrier (--json: barriers).")
    console.print(f"[dim]{SAFETY_NOTE}[/dim]")


def _write_csv(records: list[dict]) -> str:
    from cationcalc.report.outputs import csv_text

    return csv_text(records)


def build_parser() -> argparse.ArgumentParser:
    from cationcalc.cli.arguments import Parser, positive_int_arg, pressure_arg, temperature_arg
    from cationcalc.compute.models import PRESSURE_RANGE_PA, TEMPERATURE_RANGE_K

    parser = Parser(prog="cationcalc", description="Carbocation stability and ionization rates from GFN2-xTB: "
                                     "hydride-ion affinities, heterolysis and ionization energies, "
                                     "rate constants and half-lives in solvolysis media, ionization sites, "
                                     "leaving-group ladders, shifts, thermochemistry.")
    parser.add_argument("--version", action="version", version=f"cationcalc {__version__}")
    sub = parser.add_subparsers(dest="command", required=True)
    from cationcalc.execution.refine import DEFAULT_LEVEL

    def common(p, calibrated: bool = False):
        p.add_argument("smiles", nargs="*", help="SMILES inputs")
        p.add_argument("-i", "--input", help="file with one SMILES per line (optional name after it); - for stdin")
        p.add_argument("--solvent", default="none", help="implicit solvent (ALPB with tblite), 'none' for gas")
        p.add_argument("--engine", default="tblite", choices=["tblite", "xtb"], help="GFN2-xTB implementation")
        p.add_argument("--temperature", type=temperature_arg, default=298.15,
                       help=f"temperature in K (default 298.15; {TEMPERATURE_RANGE_K[0]:g}-{TEMPERATURE_RANGE_K[1]:g})")
        p.add_argument("--conformers", type=positive_int_arg, default=None,
                       help="cap on embedded conformers per species (1 or more)")
        p.add_argument("--pressure", type=pressure_arg, default=101325.0,
                       help="gas-phase standard pressure in Pa (default 101325 = 1 atm; 100000 = 1 bar; "
                            f"{PRESSURE_RANGE_PA[0]:g}-{PRESSURE_RANGE_PA[1]:g})")
        p.add_argument("--rrho", action="store_true", help="plain RRHO instead of quasi-RRHO entropies")
        p.add_argument("--mix-enantiomers", action="store_true",
                       help="add the entropy of mixing R ln 2 for chiral species (default off)")
        p.add_argument("--workers", type=positive_int_arg, default=None,
                       help="processes, 1 or more (default: one per core)")
        p.add_argument("--force", action="store_true", help="compute species above the size limit")
        out = p.add_mutually_exclusive_group()
        out.add_argument("--json", action="store_true", help="print a JSON list of records")
        out.add_argument("--csv", action="store_true", help="print CSV records")
        p.add_argument("--wide", action="store_true",
                       help="terminal table with every column and every note (default: the short reading view)")
        p.add_argument("--profile", action="store_true", help="print where the time went (stderr)")
        p.add_argument("--store", default=None, metavar="FILE",
                       help="SQLite result store: species already in it are read, new ones added")
        if calibrated:
            p.add_argument("--calibrated", action="store_true", help="report HIA calibrated against gas-phase "
                           "experiment (labelled; raw kept as hia_raw_kcal_mol)")
        p.add_argument("--refine", action="store_const", const=DEFAULT_LEVEL, default=None,
                       help=f"DFT single points (PySCF) on the GFN2-xTB structures at {DEFAULT_LEVEL}; another "
                            "level with --refine=LEVEL, e.g. --refine=B3LYP-D3BJ/def2-SVP (/CPCM or /SMD after "
                            "the basis solvates the DFT itself); GFN2-xTB values kept as *_xtb_* "
                            "(pip install 'cationcalc[dft]')")
        p.add_argument("--refine-level", dest="refine", default=None, metavar="LEVEL", help=argparse.SUPPRESS)

    p_hia = sub.add_parser("hia", help="hydride-ion affinities of carbocations")
    common(p_hia, calibrated=True)
    p_hia.add_argument("--reference", default="tert-butyl",
                       help="anchor cation (name or SMILES from the bundled gas-phase HIA table)")
    p_het = sub.add_parser("heterolysis", help="R–X → R⁺ + X⁻ energies for alkyl halides")
    common(p_het)
    p_thermo = sub.add_parser("thermo", help="energy, ZPE, H, S, G, symmetry and frequencies of any species")
    common(p_thermo)
    p_ion = sub.add_parser("ionize", help="ΔG of ionization R–X → R⁺ + X in a solvent, with a verdict")
    common(p_ion)
    p_ion.add_argument("--leaving-group", default="auto",
                       help="leaving group to break (name from the library, e.g. OTs, chloride), or auto")
    p_ion.add_argument("--acid", action="store_true", help="protonate alcohol/ether oxygens (R–OH → R–OH2+)")
    p_ion.add_argument("--reference", default=None, dest="reference_substrate",
                       help="substrate SMILES for ΔΔG_ion (default: tert-butyl with the same leaving group)")
    p_ion.add_argument("--no-shifts", action="store_true",
                       help="skip the screen for downhill 1,2-shifts of the cation formed")
    p_sites = sub.add_parser("sites", help="rank every ionization site of a substrate (or every C–H by HIA)")
    common(p_sites, calibrated=True)
    p_sites.add_argument("--acid", action="store_true", help="protonate alcohol/ether oxygens first")
    p_sites.add_argument("--hydride", action="store_true",
                         help="scan hydride abstraction at every C–H even when a leaving group is present")
    p_sites.add_argument("--no-shifts", action="store_true",
                         help="skip the screen for downhill 1,2-shifts of the cations formed")
    p_ladder = sub.add_parser("ladder", help="ΔG_ion of one skeleton (written with *) for every leaving group")
    common(p_ladder)
    p_ladder.add_argument("--groups", default=None,
                          help="comma-separated leaving groups to include (default: the whole library)")
    p_shifts = sub.add_parser("shifts", help="1,2-shifts and ring expansions of carbocations, with driving forces")
    common(p_shifts)
    p_shifts.add_argument("--depth", type=int, default=3, help="longest shift path searched (default 3)")
    p_shifts.add_argument("--threshold", type=float, default=1.0,
                          help="ΔG (kcal/mol) below which a downhill shift is flagged (default 1)")
    p_shifts.add_argument("--ceiling", type=float, default=25.0,
                          help="highest intermediate (kcal/mol above the parent) a path may pass (default 25)")
    p_shifts.add_argument("--barriers", action="store_true", help="NEB barrier for each flagged step (slow)")
    p_ion.add_argument("--medium", default=None,
                       help="solvolysis medium for rate constants and half-lives (80E20W, '80%% ethanol', "
                            "'97%% TFE (w/w)', water, …); the verdict then speaks in time")
    p_ladder.add_argument("--medium", default=None,
                          help="solvolysis medium: half-life per leaving group where its N_f is published")
    p_rate = sub.add_parser("rate", help="rate constant, half-life and cation lifetime of R–X in a solvolysis medium")
    p_rate.add_argument("smiles", nargs="*", help="substrate SMILES inputs")
    p_rate.add_argument("-i", "--input", help="file with one SMILES per line (optional name after it); - for stdin")
    p_rate.add_argument("--medium", required=True,
                        help="solvolysis medium as the trade writes it: 80E20W, '80%% ethanol', 'ethanol/water 80:20', "
                             "'97%% TFE (w/w)', acetone, water")
    p_rate.add_argument("--temperature", type=float, default=298.15,
                        help="temperature in K for k and the half-life (273.15–423.15; default 298.15)")
    p_rate.add_argument("--leaving-group", default="auto", help="leaving group to break (chloride, bromide, …), or auto")
    p_rate.add_argument("--conformers", type=positive_int_arg, default=None,
                        help="cap on embedded conformers per species (1 or more)")
    p_rate.add_argument("--workers", type=positive_int_arg, default=None, help="processes (default: one per core)")
    p_rate.add_argument("--force", action="store_true", help="compute species above the size limit")
    rate_out = p_rate.add_mutually_exclusive_group()
    rate_out.add_argument("--json", action="store_true", help="print a JSON list of records")
    rate_out.add_argument("--csv", action="store_true", help="print CSV records")
    p_rate.add_argument("--wide", action="store_true", help="every column and every note in the terminal table")
    p_rate.add_argument("--profile", action="store_true", help="print where the time went (stderr)")
    p_rate.add_argument("--store", default=None, metavar="FILE",
                        help="SQLite result store: species already in it are read, new ones added")
    p_rate.set_defaults(solvent="none", engine="tblite", pressure=101325.0, rrho=False, mix_enantiomers=False,
                        calibrated=False, refine=None)
    sub.add_parser("check", help="recompute the bundled reference sets and report errors, trends and plots "
                   "(cationcalc check [--quick]: a small subset of cheap species; see check --help)", add_help=False)
    sub.add_parser("run", help="run a YAML study file (cationcalc run STUDY.yaml [--dry-run]; see run --help)",
                   add_help=False)
    return parser


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else list(argv)
    if argv and argv[0] == "run":
        from cationcalc.cli.run_command import main as run_study

        return run_study(argv[1:])
    if argv and argv[0] == "check":
        from cationcalc.cli.check_command import main as run_checks

        return run_checks(argv[1:])
    from cationcalc.cli.arguments import split_refine

    parser = build_parser()
    try:
        args, extra = parser.parse_known_args(split_refine(argv))
        # SMILES after an option (hia A --refine B) are inputs too; anything else is a usage error
        if any(token.startswith("-") and token != "-" for token in extra):
            parser.error(f"unrecognized arguments: {' '.join(extra)}")
        args.smiles = list(args.smiles) + extra
    except SystemExit as exc:  # one-line usage error (or --help)
        return int(exc.code or 0)
    from cationcalc.engines.solvents import normalise_solvent
    from cationcalc.execution.executors import default_workers
    from cationcalc.chem.reference import hia_reference
    from cationcalc.tasks.records import BatchInterrupted
    from cationcalc.tasks.runner import run_task

    try:
        normalise_solvent(args.solvent)
        if args.command == "hia":
            hia_reference(args.reference)
        if getattr(args, "medium", None):
            from cationcalc.chem.media import medium
            from cationcalc.tasks.rate import check_temperature

            medium(args.medium)
            check_temperature(args.temperature)
        if args.command in ("ionize", "rate") and args.leaving_group != "auto":
            from cationcalc.chem.leaving_groups import leaving_group

            leaving_group(args.leaving_group)
        if args.command == "ladder" and args.groups:
            from cationcalc.chem.leaving_groups import leaving_group

            for name in args.groups.split(","):
                leaving_group(name)
        if args.refine:
            from cationcalc.execution.refine import parse_level

            misplaced = _level_among_smiles(args.smiles)
            if misplaced is not None:
                try:
                    parse_level(misplaced)
                except ValueError as exc:
                    return _usage_error(f"{str(exc).splitlines()[0]}; a DFT level is written --refine=LEVEL")
                return _usage_error(f"{misplaced!r} is a DFT level, not a SMILES: write --refine={misplaced}")

            if args.command == "shifts":
                return _usage_error("--refine is not available for shifts yet; refine the cations with "
                                    "cationcalc hia/ionize --refine")
            parse_level(args.refine)
            from cationcalc.engines.pyscf_engine import DFTUnavailable, require_pyscf

            try:
                require_pyscf()
            except DFTUnavailable as exc:
                return _usage_error(str(exc))
    except ValueError as exc:
        return _usage_error(str(exc))
    try:
        items = _read_inputs(args)
    except SystemExit as exc:
        return int(exc.code)
    if not items:
        return _usage_error(f"no inputs: give SMILES arguments or -i FILE, e.g. cationcalc {args.command} 'C[C+](C)C'")
    if args.engine == "xtb":
        try:
            import xtb  # noqa: F401
        except ImportError:
            return _usage_error("engine 'xtb' needs xtb-python: pip install 'cationcalc[xtb]' (Python <= 3.11)")
    settings = _settings(args)
    if settings.engine == "xtb" and settings.solvent is not None:
        from cationcalc.engines.solvents import GBSA_NAMES

        if settings.solvent not in GBSA_NAMES:
            return _usage_error(f"solvent {settings.solvent!r} has no GBSA parameters in xtb-python; use --engine "
                                f"tblite or one of: {', '.join(sorted(GBSA_NAMES))}")
    workers = args.workers or default_workers()
    progress = None
    if sys.stderr.isatty() and not args.json and not args.csv:
        done = {"n": 0}

        def progress(sp, result):
            done["n"] += 1
            print(f"\r  computed {done['n']} species (last: {sp.smiles[:40]})", end="", file=sys.stderr, flush=True)
    interrupted = False
    store = None
    if args.store:
        from cationcalc.execution.store import ResultStore, StoreError

        try:
            store = ResultStore(args.store)
        except StoreError as exc:
            return _usage_error(str(exc))
    from cationcalc.execution.executors import stop_signal, terminate_as_interrupt
    from cationcalc.execution.store import StoreError

    try:
        with terminate_as_interrupt():
            records = _run(args, items, settings, workers, progress, store)
    except BatchInterrupted as exc:
        records, interrupted = exc.records, True
        why = "stopped by SIGTERM" if stop_signal() == "SIGTERM" else "interrupted"
        print(f"\ncationcalc: {why}; printing what finished" + (f" (kept in {args.store})" if store else ""),
              file=sys.stderr)
    except StoreError as exc:
        return _usage_error(str(exc))
    if progress:
        print("\r" + " " * 70 + "\r", end="", file=sys.stderr)
    if store is not None and store.write_error:
        print(f"cationcalc: warning: the result store {args.store} could not be written ({store.write_error}); "
              "the results below are complete but not stored: keep them with --json > FILE, or give a writable "
              "--store and run again", file=sys.stderr)
    if not args.profile:  # new flat records without the profile (typed records are read-only)
        records = [{k: v for k, v in r.items() if k != "profile"} for r in records]
    if args.json:
        from cationcalc.report.outputs import finite

        print(json.dumps(finite(records), indent=2, ensure_ascii=False, allow_nan=False))
        print(SAFETY_NOTE, file=sys.stderr)
    elif args.csv:
        sys.stdout.write(_write_csv(records))
        print(SAFETY_NOTE, file=sys.stderr)
    elif args.wide:
        _print_table(args.command, records)
    else:
        _print_view(args.command, records)
    if args.profile:
        wall = sum(r.get("profile", {}).get("wall_s", 0) for r in records)
        engine = sum(r.get("profile", {}).get("engine_s", 0) for r in records)
        print(f"profile: species wall {wall:.2f} s, engine {engine:.2f} s, ratio "
              f"{(engine / wall if wall else 0):.2f}", file=sys.stderr)
    if interrupted:
        return 143 if stop_signal() == "SIGTERM" else 130
    return 1 if any(r.get("error") for r in records) else 0


def _run(args, items, settings, workers, progress, store) -> list[dict]:
    """Compute the records of one command (raises BatchInterrupted after Ctrl-C or SIGTERM)."""
    from cationcalc.tasks.runner import run_task

    if args.command == "shifts":
        from cationcalc.tasks.shifts import run_shifts

        return run_shifts(items, settings, depth=args.depth, threshold_kcal_mol=args.threshold,
                          ceiling_kcal_mol=args.ceiling, barriers=args.barriers, workers=workers,
                          force=args.force, progress=progress, store=store)
    options = {}
    if args.command == "ionize":
        options = {"leaving_group": args.leaving_group, "acid": args.acid,
                   "reference_substrate": args.reference_substrate, "shifts": not args.no_shifts}
    elif args.command == "sites":
        options = {"acid": args.acid, "hydride": args.hydride, "shifts": not args.no_shifts}
    elif args.command == "ladder":
        options = {"groups": [g.strip() for g in args.groups.split(",") if g.strip()] if args.groups else None}
    elif args.command == "rate":
        options = {"leaving_group": args.leaving_group}
    if getattr(args, "medium", None):
        options.update({"medium": args.medium, "rate_temperature_k": args.temperature})
    if getattr(args, "refine", None):
        options["refine"] = args.refine
        options["refine_log"] = lambda line: print(line, file=sys.stderr, flush=True)
    return run_task(args.command, items, settings, reference=getattr(args, "reference", "tert-butyl"),
                    workers=workers, force=args.force, progress=progress,
                    calibrated=getattr(args, "calibrated", False), store=store, **options)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
