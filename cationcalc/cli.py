"""The ``cationcalc`` command line.

    cationcalc hia "C[C+](C)C" "[CH2+]c1ccccc1" --solvent water
    cationcalc heterolysis "CC(C)(C)Cl" --json
    cationcalc thermo "C" "[Cl-]" --temperature 298.15

Inputs come as arguments or from ``-i FILE`` (one SMILES per line with an
optional name after whitespace; ``-`` reads standard input).  A terminal gets
a table; ``--json`` and ``--csv`` are for machines.  Exit status: 0 when every
input succeeded, 1 when some failed (the others are still printed), 2 for bad
usage, 130 when interrupted (finished records are still printed).
"""

from __future__ import annotations

import argparse
import csv
import io
import json
import sys

from . import SAFETY_NOTE, __version__


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


def _usage_error(message: str) -> int:
    print(f"cationcalc: error: {message}", file=sys.stderr)
    return 2


def _settings(args):
    from .conformers import ConformerSettings
    from .models import Settings

    conformer_options = {}
    if args.conformers is not None:
        conformer_options["max_conformers"] = args.conformers
    return Settings(engine=args.engine, solvent=args.solvent, temperature_k=args.temperature,
                    pressure_pa=args.pressure, conformers=ConformerSettings(**conformer_options),
                    qrrho=not args.rrho, enantiomer_mixing=args.mix_enantiomers)


COLUMNS = {
    "hia": [("name", "name"), ("cation_smiles", "cation"), ("hia_kcal_mol", "HIA kcal/mol"),
            ("hia_kJ_mol", "HIA kJ/mol"), ("hia_G_kcal_mol", "ΔG-HIA kcal/mol")],
    "heterolysis": [("name", "name"), ("substrate_smiles", "substrate"), ("leaving_group", "X"),
                    ("dE_het_kcal_mol", "ΔE"), ("dH_het_kcal_mol", "ΔH"), ("dG_het_kcal_mol", "ΔG kcal/mol"),
                    ("dG_het_kJ_mol", "ΔG kJ/mol")],
    "thermo": [("smiles", "species"), ("E_hartree", "E/Eh"), ("zpe_kcal_mol", "ZPE"), ("H_kcal_mol", "H−E"),
               ("S_J_mol_K", "S J/mol/K"), ("G_kcal_mol", "G−E"), ("point_group", "group"),
               ("symmetry_number", "σ"), ("imaginary_frequencies_cm1", "imag. cm⁻¹")],
}


def _print_table(task: str, records: list[dict]) -> None:
    from rich.console import Console
    from rich.table import Table

    console = Console(width=max(120, Console().width))
    first = records[0] if records else {}
    title = {"hia": "hydride-ion affinity", "heterolysis": "heterolysis R–X → R⁺ + X⁻",
             "thermo": "thermochemistry"}[task]
    table = Table(title=f"{title} — {first.get('level', '')}, {first.get('temperature_k', 298.15)} K",
                  title_justify="left")
    for _, header in COLUMNS[task]:
        table.add_column(header)
    table.add_column("notes")
    for r in records:
        row = []
        for key, _ in COLUMNS[task]:
            value = r.get(key, r.get("input") if key in ("cation_smiles", "substrate_smiles", "smiles") else "")
            row.append("" if value is None else str(value))
        notes = []
        if r.get("error"):
            notes.append(f"[red]error: {r['error']}[/red]")
        if r.get("rearranged"):
            notes.append(f"[yellow]relaxed to {r.get('relaxed_cation_smiles') or r.get('relaxed_smiles') or 'a bridged structure'}[/yellow]")
        notes += [w for w in r.get("warnings", [])]
        table.add_row(*row, "\n".join(notes))
    console.print(table)
    if task == "hia" and first.get("reference"):
        console.print(f"Anchor: {first['reference']} cation, HIA {first['reference_hia_kcal_mol']} kcal/mol "
                      f"({first['reference_source']}). HIA = ΔH298 of R⁺ + H⁻ → R–H by isodesmic hydride exchange.")
    if task == "heterolysis":
        console.print("Standard state: 1 atm in the gas phase, 1 mol/L in solution (1 atm → 1 M applied once per species).")
    console.print(f"[dim]{SAFETY_NOTE}[/dim]")


def _write_csv(records: list[dict]) -> str:
    keys: list[str] = []
    for r in records:
        for k in r:
            if k not in keys:
                keys.append(k)
    buffer = io.StringIO()
    writer = csv.DictWriter(buffer, fieldnames=keys, extrasaction="ignore")
    writer.writeheader()
    for r in records:
        writer.writerow({k: json.dumps(v) if isinstance(v, (list, dict)) else v for k, v in r.items()})
    return buffer.getvalue()


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="cationcalc", description="Carbocation stability from GFN2-xTB: "
                                     "hydride-ion affinities, heterolysis energies, thermochemistry.")
    parser.add_argument("--version", action="version", version=f"cationcalc {__version__}")
    sub = parser.add_subparsers(dest="command", required=True)

    def common(p):
        p.add_argument("smiles", nargs="*", help="SMILES inputs")
        p.add_argument("-i", "--input", help="file with one SMILES per line (optional name after it); - for stdin")
        p.add_argument("--solvent", default="none", help="implicit solvent (ALPB with tblite), 'none' for gas")
        p.add_argument("--engine", default="tblite", choices=["tblite", "xtb"], help="GFN2-xTB implementation")
        p.add_argument("--temperature", type=float, default=298.15, help="temperature in K (default 298.15)")
        p.add_argument("--conformers", type=int, default=None, help="cap on embedded conformers per species")
        p.add_argument("--pressure", type=float, default=101325.0,
                       help="gas-phase standard pressure in Pa (default 101325 = 1 atm; 100000 = 1 bar)")
        p.add_argument("--rrho", action="store_true", help="plain RRHO instead of quasi-RRHO entropies")
        p.add_argument("--mix-enantiomers", action="store_true",
                       help="add the entropy of mixing R ln 2 for chiral species (default off)")
        p.add_argument("--workers", type=int, default=None, help="processes (default: one per core)")
        p.add_argument("--force", action="store_true", help="compute species above the size limit")
        out = p.add_mutually_exclusive_group()
        out.add_argument("--json", action="store_true", help="print a JSON list of records")
        out.add_argument("--csv", action="store_true", help="print CSV records")
        p.add_argument("--profile", action="store_true", help="print where the time went (stderr)")

    p_hia = sub.add_parser("hia", help="hydride-ion affinities of carbocations")
    common(p_hia)
    p_hia.add_argument("--reference", default="tert-butyl",
                       help="anchor cation (name or SMILES from the bundled gas-phase HIA table)")
    p_het = sub.add_parser("heterolysis", help="R–X → R⁺ + X⁻ energies for alkyl halides")
    common(p_het)
    p_thermo = sub.add_parser("thermo", help="energy, ZPE, H, S, G, symmetry and frequencies of any species")
    common(p_thermo)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    from .engines.solvents import normalise_solvent
    from .executors import default_workers
    from .reference import hia_reference
    from .tasks import BatchInterrupted, run_task

    try:
        normalise_solvent(args.solvent)
        if args.command == "hia":
            hia_reference(args.reference)
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
        from .engines.solvents import GBSA_NAMES

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
    try:
        records = run_task(args.command, items, settings, reference=getattr(args, "reference", "tert-butyl"),
                           workers=workers, force=args.force, progress=progress)
    except BatchInterrupted as exc:
        records, interrupted = exc.records, True
        print("\ncationcalc: interrupted; printing what finished", file=sys.stderr)
    if progress:
        print("\r" + " " * 70 + "\r", end="", file=sys.stderr)
    if not args.profile:
        for r in records:
            r.pop("profile", None)
    if args.json:
        print(json.dumps(records, indent=2, ensure_ascii=False))
        print(SAFETY_NOTE, file=sys.stderr)
    elif args.csv:
        sys.stdout.write(_write_csv(records))
        print(SAFETY_NOTE, file=sys.stderr)
    else:
        _print_table(args.command, records)
    if args.profile:
        wall = sum(r.get("profile", {}).get("wall_s", 0) for r in records)
        engine = sum(r.get("profile", {}).get("engine_s", 0) for r in records)
        print(f"profile: species wall {wall:.2f} s, engine {engine:.2f} s, ratio "
              f"{(engine / wall if wall else 0):.2f}", file=sys.stderr)
    if interrupted:
        return 130
    return 1 if any(r.get("error") for r in records) else 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
