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
import typing

from cationcalc.about import SAFETY_NOTE, __version__
from cationcalc.cli.tables import COLUMNS, _print_table, _print_view, _write_csv  # noqa: F401  (COLUMNS: tests)


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
    settings = Settings(engine=args.engine, solvent=args.solvent, temperature_k=args.temperature,
                        pressure_pa=args.pressure, conformers=ConformerSettings(**conformer_options),
                        qrrho=not args.rrho, enantiomer_mixing=args.mix_enantiomers)
    return settings.full_protocol() if getattr(args, "thorough", False) else settings


#: the full protocol, for the final answer on a few candidates
THOROUGH_HELP = ("the full protocol: a Hessian on every conformer of the window, LBFGS, every site and every shift "
                 "product computed in full (the default funnels and transfers; see benchmarks/druglike.py)")
#: options that the full protocol switches off (None: everything computed in full)
THOROUGH_OPTIONS = {"site_window_kcal_mol": None, "shift_window_kcal_mol": None}


def _common(p, calibrated: bool = False) -> None:
    """The options every task command with level options takes: inputs, level, output, store, DFT refinement."""
    from cationcalc.cli.arguments import positive_int_arg, pressure_arg, temperature_arg
    from cationcalc.compute.models import PRESSURE_RANGE_PA, TEMPERATURE_RANGE_K
    from cationcalc.execution.refine import DEFAULT_GEOMETRY_LEVEL, DEFAULT_LEVEL

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
    p.add_argument("--thorough", action="store_true", help=THOROUGH_HELP)
    _output_options(p, "terminal table with every column and every note (default: the short reading view)")
    if calibrated:
        p.add_argument("--calibrated", action="store_true", help="report HIA calibrated against gas-phase "
                       "experiment (labelled; raw kept as hia_raw_kcal_mol)")
    p.add_argument("--refine", action="store_const", const=DEFAULT_LEVEL, default=None,
                   help=f"DFT single points (PySCF) on the GFN2-xTB structures at {DEFAULT_LEVEL}; another "
                        "level with --refine=LEVEL, e.g. --refine=B3LYP-D3BJ/def2-SVP (/CPCM or /SMD after "
                        "the basis solvates the DFT itself); GFN2-xTB values kept as *_xtb_* "
                        "(pip install 'cationcalc[dft]')")
    p.add_argument("--refine-level", dest="refine", default=None, metavar="LEVEL", help=argparse.SUPPRESS)
    p.add_argument("--refine-geometry", action="store_const", const=DEFAULT_GEOMETRY_LEVEL, default=None,
                   help=f"with --refine: optimise each structure at {DEFAULT_GEOMETRY_LEVEL} first (DFT//DFT; "
                        "another level with --refine-geometry=LEVEL); the cost is printed before the run")
    p.add_argument("--refine-geometry-level", dest="refine_geometry", default=None, metavar="LEVEL",
                   help=argparse.SUPPRESS)


def _output_options(p, wide_help: str) -> None:
    out = p.add_mutually_exclusive_group()
    out.add_argument("--json", action="store_true", help="print a JSON list of records")
    out.add_argument("--csv", action="store_true", help="print CSV records")
    p.add_argument("--wide", action="store_true", help=wide_help)
    p.add_argument("--profile", action="store_true", help="print where the time went (stderr)")
    p.add_argument("--store", default=None, metavar="FILE",
                   help="SQLite result store: species already in it are read, new ones added")


def _task_options(p, task) -> None:
    """One command-line option per field of the task's options model (DFT refinement is in the common set)."""
    from cationcalc.tasks.registry import REFINE_OPTIONS, cli_meta

    for name, field in task.options.model_fields.items():
        if name in REFINE_OPTIONS:
            continue
        meta = cli_meta(field)
        help_text = (meta["cli_help"] or field.description or "").replace("%", "%%")
        if field.annotation is bool:
            flag = meta["flag"] or ("--no-" if field.default else "--") + name.replace("_", "-")
            p.add_argument(flag, dest=name, action="store_false" if field.default else "store_true", help=help_text)
            continue
        flag = meta["flag"] or "--" + name.replace("_", "-")
        kind = field.annotation if field.annotation in (int, float) else None
        if typing.get_args(field.annotation) == (float, type(None)):
            from cationcalc.cli.arguments import window_arg

            kind = window_arg
        extra = {"required": True} if field.is_required() else {"default": field.default}
        p.add_argument(flag, dest=name, metavar=meta["metavar"] or flag[2:].replace("-", "_").upper(), help=help_text,
                       **({"type": kind} if kind else {}), **extra)


def _own_level_parser(p, task) -> None:
    """A command whose species are computed at a fixed level (rate): inputs, its options, numerics, output."""
    from cationcalc.cli.arguments import positive_int_arg
    from cationcalc.compute.models import Settings

    p.add_argument("smiles", nargs="*", help="substrate SMILES inputs")
    p.add_argument("-i", "--input", help="file with one SMILES per line (optional name after it); - for stdin")
    _task_options(p, task)
    p.add_argument("--conformers", type=positive_int_arg, default=None,
                   help="cap on embedded conformers per species (1 or more)")
    p.add_argument("--workers", type=positive_int_arg, default=None, help="processes (default: one per core)")
    p.add_argument("--force", action="store_true", help="compute species above the size limit")
    _output_options(p, "every column and every note in the terminal table")
    p.set_defaults(solvent="none", engine="tblite", temperature=Settings.model_fields["temperature_k"].default,
                   pressure=101325.0, rrho=False, mix_enantiomers=False, calibrated=False, refine=None)


def build_parser() -> argparse.ArgumentParser:
    """The command line: one sub-command per registered task, then check and run."""
    from cationcalc.cli.arguments import Parser
    from cationcalc.tasks.registry import specs

    parser = Parser(prog="cationcalc", description="Carbocation stability and ionization rates from GFN2-xTB: "
                                     "hydride-ion affinities, heterolysis and ionization energies, "
                                     "rate constants and half-lives in solvolysis media, ionization sites, "
                                     "leaving-group ladders, shifts, thermochemistry.")
    parser.add_argument("--version", action="version", version=f"cationcalc {__version__}")
    sub = parser.add_subparsers(dest="command", required=True)
    for task in specs():
        p = sub.add_parser(task.name, help=task.help)
        if task.level_options:
            _common(p, calibrated=task.calibrated)
            _task_options(p, task)
        else:
            _own_level_parser(p, task)
    sub.add_parser("check", help="recompute the bundled reference sets and report errors, trends and plots "
                   "(cationcalc check [--quick]: a small subset of cheap species; see check --help)", add_help=False)
    sub.add_parser("run", help="run a YAML study file (cationcalc run STUDY.yaml [--dry-run]; see run --help)",
                   add_help=False)
    return parser


def _run_study(argv: list[str]) -> int:
    from cationcalc.cli.run_command import main as run_study

    return run_study(argv)


def _run_checks(argv: list[str]) -> int:
    from cationcalc.cli.check_command import main as run_checks

    return run_checks(argv)


#: commands with a parser of their own (everything else is a task command)
COMMANDS = {"run": _run_study, "check": _run_checks}


def main(argv: list[str] | None = None) -> int:
    """The ``cationcalc`` entry point: a command table, then parse, check, compute and print a task command."""
    argv = sys.argv[1:] if argv is None else list(argv)
    if argv and argv[0] in COMMANDS:
        return COMMANDS[argv[0]](argv[1:])
    args = _parse(argv)
    if isinstance(args, int):
        return args
    from cationcalc.tasks.registry import spec

    task = spec(args.command)
    problem = _check(args, task)
    if problem is not None:
        return _usage_error(problem)
    try:
        items = _read_inputs(args)
    except SystemExit as exc:
        return int(exc.code)
    if not items:
        return _usage_error(f"no inputs: give SMILES arguments or -i FILE, e.g. cationcalc {args.command} 'C[C+](C)C'")
    problem = _check_engine(args)
    if problem is not None:
        return _usage_error(problem)
    return _execute(args, items)


def _parse(argv: list[str]):
    """The parsed arguments, or the exit status of a usage error (or --help)."""
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
    return args


def _rate_temperature(args) -> float:
    """The temperature of rate constants: the rate command's own, else the level's."""
    return getattr(args, "temperature_k", args.temperature)


def _check(args, task) -> str | None:
    """The first problem with the solvent, the task's options or the DFT refinement request, or None."""
    from cationcalc.engines.solvents import normalise_solvent

    try:
        normalise_solvent(args.solvent)
        _check_task_options(args, task)
        if getattr(args, "refine_geometry", None) and not args.refine:
            return "--refine-geometry needs --refine: add --refine (or --refine=LEVEL)"
        if args.refine:
            return _check_refine(args, task)
    except ValueError as exc:
        return str(exc)
    return None


def _check_task_options(args, task) -> None:
    """Names the command line checks before anything is computed (ValueError with the fix)."""
    fields = task.options.model_fields
    if "reference" in fields:
        from cationcalc.chem.reference import check_hia_reference

        check_hia_reference(args.reference)
    if getattr(args, "medium", None):
        from cationcalc.chem.media import medium
        from cationcalc.tasks.rate import check_temperature

        medium(args.medium)
        check_temperature(_rate_temperature(args))
    from cationcalc.chem.leaving_groups import leaving_group

    if "leaving_group" in fields and args.leaving_group != "auto":
        leaving_group(args.leaving_group)
    if "groups" in fields and args.groups:
        for name in args.groups.split(","):
            leaving_group(name)


def _check_refine(args, task) -> str | None:
    """A DFT level written where a SMILES goes, a task without refinement, an unknown level, no PySCF."""
    from cationcalc.execution.refine import parse_level

    misplaced = _level_among_smiles(args.smiles)
    if misplaced is not None:
        try:
            parse_level(misplaced)
        except ValueError as exc:
            return f"{str(exc).splitlines()[0]}; a DFT level is written --refine=LEVEL"
        return f"{misplaced!r} is a DFT level, not a SMILES: write --refine={misplaced}"
    if task.refine is None:
        return (f"--refine is not available for {task.name} yet; refine the cations with "
                "cationcalc hia/ionize --refine")
    parse_level(args.refine)
    if getattr(args, "refine_geometry", None):
        from cationcalc.execution.refine import parse_geometry_level

        parse_geometry_level(args.refine_geometry)
    from cationcalc.engines.pyscf_engine import DFTUnavailable, require_pyscf

    try:
        require_pyscf()
    except DFTUnavailable as exc:
        return str(exc)
    return None


def _check_engine(args) -> str | None:
    """xtb-python present when asked for, and a solvent it has GBSA parameters for."""
    from cationcalc.engines.solvents import check_gbsa_solvent, normalise_solvent

    if args.engine == "xtb":
        try:
            import xtb  # noqa: F401
        except ImportError:
            return "engine 'xtb' needs xtb-python: pip install 'cationcalc[xtb]' (Python <= 3.11)"
    try:
        check_gbsa_solvent(args.engine, normalise_solvent(args.solvent))
    except ValueError as exc:
        return str(exc)
    return None


def _progress(args):
    """A one-line species counter on a terminal's stderr (None for --json, --csv or a pipe)."""
    if not sys.stderr.isatty() or args.json or args.csv:
        return None
    done = {"n": 0}

    def progress(sp, result):
        done["n"] += 1
        print(f"\r  computed {done['n']} species (last: {sp.smiles[:40]})", end="", file=sys.stderr, flush=True)
    return progress


def _execute(args, items: list[tuple[str, str]]) -> int:
    """Compute (through the store when given), print, and the exit status."""
    from cationcalc.execution.executors import default_workers, stop_signal, terminate_as_interrupt
    from cationcalc.execution.store import ResultStore, StoreError
    from cationcalc.tasks.records import BatchInterrupted

    settings = _settings(args)
    progress = _progress(args)
    store = None
    try:
        store = ResultStore(args.store) if args.store else None
        with terminate_as_interrupt():
            records = _run(args, items, settings, args.workers or default_workers(), progress, store)
        interrupted = False
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
    _print_records(args, records)
    if interrupted:
        return 143 if stop_signal() == "SIGTERM" else 130
    return 1 if any(r.get("error") for r in records) else 0


def _print_records(args, records: list[dict]) -> None:
    """JSON, CSV, the wide table or the reading view; the time profile on request."""
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


def _options(args, task) -> dict:
    """The task's options as the command line gave them (a comma list split into names)."""
    from cationcalc.tasks.registry import REFINE_OPTIONS, cli_meta

    options = {}
    for name, field in task.options.model_fields.items():
        if name in REFINE_OPTIONS:
            continue
        value = getattr(args, name)
        if cli_meta(field)["comma_list"]:
            value = [g.strip() for g in value.split(",") if g.strip()] if value else None
        options[name] = value
    if getattr(args, "thorough", False):
        options.update({k: v for k, v in THOROUGH_OPTIONS.items() if k in task.options.model_fields})
    return options


def _run(args, items, settings, workers, progress, store) -> list[dict]:
    """Compute the records of one command (raises BatchInterrupted after Ctrl-C or SIGTERM)."""
    from cationcalc.tasks.registry import spec

    task = spec(args.command)
    options = _options(args, task)
    common = dict(workers=workers, force=args.force, progress=progress, store=store)
    if task.run is not None:  # a task that runs itself (the shift search)
        return task.run(items, settings, **options, **common)
    from cationcalc.tasks.runner import run_task

    if options.get("medium") and "temperature_k" not in options:
        options["rate_temperature_k"] = args.temperature
    if args.profile or progress is not None:
        options["plan_log"] = lambda line: print(("\n" if progress else "") + line, file=sys.stderr, flush=True)
    if getattr(args, "refine", None):
        options["refine"] = args.refine
        if getattr(args, "refine_geometry", None):
            options["refine_geometry"] = args.refine_geometry
        options["refine_log"] = lambda line: print(line, file=sys.stderr, flush=True)
    return run_task(task.name, items, settings, calibrated=getattr(args, "calibrated", False), **common, **options)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
