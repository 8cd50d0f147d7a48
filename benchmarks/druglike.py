"""Drug-like throughput: ``ionize`` over 20 invented drug-like substrates in water, every site, shift screen on.

Run:  python benchmarks/druglike.py [--workers 1 2] [--label before] [--limit N | --only NAME ...]
                                    [--settings-json '{...}'] [--task-options-json '{...}'] [--store FILE]
                                    [--compare REF.json [--against RUN.json]] [--out FILE]
      (wrap in ``flock /tmp/cationcalc-heavy.lock`` on a shared machine)

The set is ``benchmarks/druglike.smi`` (SMILES, name, acid yes/no; sorted by
heavy atoms, so ``--limit N`` takes the N smallest).  Each worker count runs
in a fresh interpreter (cold engine cache, fresh pool) that calls
``run_task("ionize", items, Settings(solvent="water", **SETTINGS), workers=N,
acid=..., shifts=True, **TASK_OPTIONS)`` twice, once for the substrates that
ask for ``--acid`` and once for the others (as two command-line invocations
would), timed in total; leaving group auto, no store unless ``--store``.
``--settings-json`` and ``--task-options-json`` pass protocol knobs without
changing this script, so the same script measures today's code and later
protocols; ``--label`` names the results file
(``benchmarks/results/druglike_<label>.json``).

Prints per worker count: wall time, substrates/min, species computed,
gradients by stage (sum over the computed species and per substrate),
engine time / species wall, parallel efficiency T1/(n·Tn) when 1 and n ran,
peak resident memory of the main process and of the workers, the cost
exponent of species wall and gradients against heavy atoms; per substrate:
the chosen site (cation, leaving group, atom), ΔG_ion, heavy atoms, sites,
the failure if any, and the gradients attributed to it (a species belongs to
the substrates whose substrate, protonated substrate, cations (shift
products are isomers of them) or departing groups have its molecular
formula; a species of several substrates is split evenly; the tert-butyl
references and common anions are "shared").

``--compare REF.json``: agreement with a reference run (the full protocol):
per substrate |ΔΔG_ion| of the winning site and whether the same site
(cation SMILES + leaving group) won; max and mean |Δ| and the count of the
same site, as a markdown table.  With ``--against RUN.json`` nothing is
computed: RUN.json is compared with REF.json.
"""

from __future__ import annotations

import argparse
import json
import time
from collections import Counter
from pathlib import Path

from _common import HERE, RESULTS, fit_exponent, machine, peak_rss_mb, run_child, save

SET = HERE / "druglike.smi"


def druglike(limit: int | None = None, only: list[str] | None = None) -> list[dict]:
    """The benchmark set: dicts with smiles, name, acid (bool), in file order (ascending heavy atoms)."""
    rows = []
    for line in SET.read_text(encoding="utf-8").splitlines():
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        smiles, name, acid = line.split()
        rows.append({"smiles": smiles, "name": name, "acid": acid.lower() in ("yes", "true", "1")})
    if only:
        unknown = set(only) - {r["name"] for r in rows}
        if unknown:
            raise SystemExit(f"unknown substrate name(s): {', '.join(sorted(unknown))}")
        rows = [r for r in rows if r["name"] in only]
    return rows[:limit] if limit else rows


def formula(smiles: str) -> Counter:
    """Element counts with hydrogens, charge ignored."""
    from rdkit import Chem

    mol = Chem.AddHs(Chem.MolFromSmiles(smiles))
    return Counter(a.GetSymbol() for a in mol.GetAtoms())


def heavy_atoms(smiles: str) -> int:
    from rdkit import Chem

    return Chem.MolFromSmiles(smiles).GetNumHeavyAtoms()


def _key(c: Counter) -> str:
    return "".join(f"{el}{c[el]}" for el in sorted(c) if c[el] > 0)


def substrate_formulas(smiles: str, cations: list[str]) -> set[str]:
    """Formulas of the species one substrate can need: itself, protonated, its cations, their departing groups."""
    s = formula(smiles)
    sh = s + Counter({"H": 1})
    keys = {_key(s), _key(sh)}
    for cation in cations:
        c = formula(cation)
        keys.add(_key(c))
        for parent in (s, sh):
            rest = Counter(parent)
            rest.subtract(c)
            if all(v >= 0 for v in rest.values()) and sum(rest.values()) > 0:
                keys.add(_key(rest))
    return keys


def _site(record) -> dict:
    alternatives = record.get("alternatives") or []
    return {"input": record.get("input"), "name": record.get("name"), "cation_smiles": record.get("cation_smiles"),
            "leaving_group": record.get("leaving_group"), "site_atom": record.get("site_atom"),
            "dG_ion_kcal_mol": record.get("dG_ion_kcal_mol"), "dE_ion_kcal_mol": record.get("dE_ion_kcal_mol"),
            "verdict": record.get("verdict"),
            "error": record.get("error"), "sites": 1 + len(alternatives),
            "alternatives": [{k: a.get(k) for k in ("site_atom", "leaving_group", "cation_smiles", "dG_ion_kcal_mol",
                                                    "error")} for a in alternatives]}


def attribute(species: list[dict], substrates: list[dict]) -> dict:
    """Add to each substrate the species, wall and gradients (by stage) it needed; the unattributed rest."""
    owners = {s["name"]: substrate_formulas(s["input"], [c for c in [s["cation_smiles"]] + [
        a["cation_smiles"] for a in s["alternatives"]] if c]) for s in substrates}
    for s in substrates:
        s.update(species_attributed=0.0, species_wall_s=0.0, gradients={})
    shared = {"species": 0, "wall_s": 0.0, "gradients": {}}
    for sp in species:
        key = _key(formula(sp["smiles"]))
        mine = [s for s in substrates if key in owners[s["name"]]]
        targets = [(s, 1.0 / len(mine)) for s in mine] if mine else []
        if not mine:
            shared["species"] += 1
            shared["wall_s"] += sp["wall_s"]
            for k, v in sp["gradients"].items():
                shared["gradients"][k] = shared["gradients"].get(k, 0) + v
        for s, share in targets:
            s["species_attributed"] += share
            s["species_wall_s"] += share * sp["wall_s"]
            for k, v in sp["gradients"].items():
                s["gradients"][k] = s["gradients"].get(k, 0) + share * v
    for s in substrates:
        s["gradients"] = {k: round(v) for k, v in s["gradients"].items()}
        s["species_wall_s"] = round(s["species_wall_s"], 2)
        s["species_attributed"] = round(s["species_attributed"], 2)
    return shared


def child(workers: int, limit: int | None, only: list[str] | None, settings_json: str, options_json: str,
          store_path: str | None) -> None:
    from cationcalc.compute.models import Settings
    from cationcalc.tasks.runner import run_task

    rows = druglike(limit, only)
    settings = Settings(**{"solvent": "water", **json.loads(settings_json or "{}")})
    options = {"shifts": True, **json.loads(options_json or "{}")}
    store = None
    if store_path:
        from cationcalc.execution.store import ResultStore

        store = ResultStore(store_path)
    species: list[dict] = []
    failures: list[str] = []

    def progress(sp, result):
        if not hasattr(result, "profile"):
            failures.append(f"{sp.smiles}: {getattr(result, 'message', result)}")
            return
        p = result.profile
        species.append({"smiles": sp.smiles, "charge": sp.charge, "atoms": len(result.numbers),
                        "heavy_atoms": sum(1 for z in result.numbers if z > 1), "wall_s": round(p.wall_s, 3),
                        "engine_s": round(p.engine_s, 3), "gradients": dict(p.gradients)})

    records, groups = [], {}
    start = time.perf_counter()
    for acid in (False, True):
        items = [(r["smiles"], r["name"]) for r in rows if r["acid"] == acid]
        if not items:
            continue
        t0 = time.perf_counter()
        records += run_task("ionize", items, settings, workers=workers, progress=progress, store=store,
                            **{**options, "acid": acid})
        groups["acid" if acid else "no_acid"] = {"substrates": len(items), "wall_s": time.perf_counter() - t0}
    wall = time.perf_counter() - start
    own, kids = peak_rss_mb()
    print(json.dumps({"workers": workers, "wall_s": wall, "groups": groups, "substrates": len(rows),
                      "settings_overrides": json.loads(settings_json or "{}"), "task_options": options,
                      "records": [_site(r) for r in records], "species": species, "species_failures": failures,
                      "peak_rss_main_mb": own, "peak_rss_worker_mb": kids if workers > 1 else own}))


def summarise(run: dict, rows: list[dict]) -> None:
    """Derived figures of one configuration, in place."""
    species = run["species"]
    grads: dict[str, int] = {}
    for sp in species:
        for k, v in sp["gradients"].items():
            grads[k] = grads.get(k, 0) + v
    n = run["substrates"]
    wall_species = sum(sp["wall_s"] for sp in species)
    run.update(substrates_per_min=60 * n / run["wall_s"], species_computed=len(species),
               gradients=grads, gradients_total=sum(grads.values()),
               gradients_per_substrate={k: round(v / n) for k, v in grads.items()},
               species_wall_s=wall_species, engine_s=sum(sp["engine_s"] for sp in species),
               overhead_ratio=(sum(sp["engine_s"] for sp in species) / wall_species) if wall_species else 0.0)
    by_name = {r["name"]: r for r in rows}
    for rec in run["records"]:
        rec["heavy_atoms"] = heavy_atoms(rec["input"])
        rec["acid"] = by_name.get(rec["name"], {}).get("acid")
    run["shared"] = attribute(species, run["records"])
    fit = {}
    pts = [sp for sp in species if sp["wall_s"] > 0 and sum(sp["gradients"].values()) > 0]
    if len({sp["heavy_atoms"] for sp in pts}) >= 3:
        fit = {"wall": fit_exponent([sp["heavy_atoms"] for sp in pts], [sp["wall_s"] for sp in pts]),
               "gradients": fit_exponent([sp["heavy_atoms"] for sp in pts],
                                         [sum(sp["gradients"].values()) for sp in pts]),
               "species": len(pts)}
    run["heavy_atom_exponent"] = fit


def print_run(run: dict, base: dict | None) -> None:
    eff = base["wall_s"] / (run["workers"] * run["wall_s"]) if base and run["workers"] > 1 else None
    run["parallel_efficiency"] = eff
    print(f"\n## workers {run['workers']}: {run['wall_s']:.1f} s for {run['substrates']} substrates = "
          f"{run['substrates_per_min']:.2f} substrates/min; {run['species_computed']} species computed; "
          f"engine/species wall {run['overhead_ratio']:.2f}; parallel efficiency "
          f"{f'{eff:.2f}' if eff is not None else '-'}; peak RSS main {run['peak_rss_main_mb']:.0f} MB, "
          f"workers {run['peak_rss_worker_mb']:.0f} MB")
    groups = {k: {"substrates": v["substrates"], "wall_s": round(v["wall_s"], 1)} for k, v in run["groups"].items()}
    print(f"groups: {json.dumps(groups)}")
    print(f"gradients by stage (sum): {run['gradients']} total {run['gradients_total']}")
    print(f"gradients by stage (per substrate, mean): {run['gradients_per_substrate']}")
    print(f"shared species (tert-butyl references, common anions): {run['shared']['species']}, "
          f"{run['shared']['wall_s']:.1f} s, gradients {run['shared']['gradients']}")
    fit = run["heavy_atom_exponent"]
    if fit:
        print(f"cost against heavy atoms over {fit['species']} species: wall ∝ heavy^{fit['wall']:.2f}, "
              f"gradients ∝ heavy^{fit['gradients']:.2f}")
    if run["species_failures"]:
        print(f"species failures: {run['species_failures']}")
    print("\n| substrate | heavy | acid | sites | leaving group | atom | cation | ΔG_ion kcal/mol | species | "
          "species wall/s | gradients (attributed) | error |")
    print("|---|---|---|---|---|---|---|---|---|---|---|---|")
    for r in run["records"]:
        dg = f"{r['dG_ion_kcal_mol']:.2f}" if r["dG_ion_kcal_mol"] is not None else "-"
        g = " ".join(f"{k} {v}" for k, v in r["gradients"].items())
        print(f"| {r['name']} | {r['heavy_atoms']} | {'yes' if r['acid'] else 'no'} | {r['sites']} | "
              f"{r['leaving_group']} | {r['site_atom']} | `{r['cation_smiles']}` | {dg} | {r['species_attributed']} | "
              f"{r['species_wall_s']} | {g} | {r['error'] or ''} |")


def compare(ref_path: Path, run_payload: dict) -> dict:
    """Agreement of a run with a reference run: per-substrate |ΔΔG_ion| and same winning site."""
    ref = json.loads(Path(ref_path).read_text(encoding="utf-8"))

    def winners(payload):
        return {r["name"]: r for r in payload["runs"][-1]["records"]}

    mine, theirs = winners(run_payload), winners(ref)
    rows, deltas, same = [], [], 0
    print(f"\n## agreement with {ref_path} (label {ref.get('label')!r}) of this run (label "
          f"{run_payload.get('label')!r})\n")
    print("| substrate | ΔG_ion ref | ΔG_ion run | abs Δ kcal/mol | same site | site ref | site run |")
    print("|---|---|---|---|---|---|---|")
    for name, r in mine.items():
        t = theirs.get(name)
        if t is None:
            continue
        a, b = t["dG_ion_kcal_mol"], r["dG_ion_kcal_mol"]
        d = abs(b - a) if a is not None and b is not None else None
        ok = (t["cation_smiles"], t["leaving_group"]) == (r["cation_smiles"], r["leaving_group"])
        same += ok
        if d is not None:
            deltas.append(d)
        rows.append({"name": name, "dG_ref": a, "dG_run": b, "abs_delta": d, "same_site": ok})
        fmt = lambda v: f"{v:.2f}" if v is not None else "-"  # noqa: E731
        print(f"| {name} | {fmt(a)} | {fmt(b)} | {fmt(d)} | {'yes' if ok else '**no**'} | "
              f"{t['leaving_group']} `{t['cation_smiles']}` | {r['leaving_group']} `{r['cation_smiles']}` |")
    summary = {"reference": str(ref_path), "compared": len(rows), "same_site": same,
               "max_abs_delta_kcal_mol": max(deltas) if deltas else None,
               "mean_abs_delta_kcal_mol": sum(deltas) / len(deltas) if deltas else None, "rows": rows}
    mx = summary["max_abs_delta_kcal_mol"]
    mean = summary["mean_abs_delta_kcal_mol"]
    print(f"\n{len(rows)} substrates compared: same site {same}/{len(rows)}; |ΔΔG_ion| max "
          f"{mx if mx is None else round(mx, 3)}, mean {mean if mean is None else round(mean, 3)} kcal/mol")
    return summary


def parse_args() -> argparse.Namespace:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--workers", type=int, nargs="+", default=[2])
    parser.add_argument("--label", default="default", help="names the results file druglike_<label>.json")
    parser.add_argument("--limit", type=int, default=None, help="the N smallest substrates only (a smoke run)")
    parser.add_argument("--only", nargs="+", default=None, help="these substrate names only")
    parser.add_argument("--settings-json", default="{}", help="Settings overrides, e.g. '{\"engine\": \"tblite\"}'")
    parser.add_argument("--task-options-json", default="{}", help="run_task options, e.g. '{\"shifts\": false}'")
    parser.add_argument("--store", default=None, help="result store file (default none: compute everything)")
    parser.add_argument("--out", default=None, help="results file (default benchmarks/results/druglike_<label>.json)")
    parser.add_argument("--compare", default=None, help="reference results file to compare against")
    parser.add_argument("--against", default=None, help="with --compare: compare this results file, compute nothing")
    parser.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    return parser.parse_args()


def main() -> None:
    args = parse_args()
    if args.child:
        child(args.workers[0], args.limit, args.only, args.settings_json, args.task_options_json, args.store)
        return
    if args.against:
        if not args.compare:
            raise SystemExit("--against needs --compare REF.json")
        compare(Path(args.compare), json.loads(Path(args.against).read_text(encoding="utf-8")))
        return
    rows = druglike(args.limit, args.only)
    passed = ["--settings-json", args.settings_json, "--task-options-json", args.task_options_json]
    passed += ["--limit", str(args.limit)] if args.limit else []
    passed += ["--only", *args.only] if args.only else []
    passed += ["--store", args.store] if args.store else []
    print(f"machine: {machine()}")
    print(f"label {args.label!r}: {len(rows)} substrates, settings {args.settings_json}, options "
          f"{args.task_options_json}, store {args.store}", flush=True)
    runs = []
    for w in args.workers:
        run = run_child(Path(__file__).resolve(), ["--workers", str(w), *passed])
        summarise(run, rows)
        runs.append(run)
    base = next((r for r in runs if r["workers"] == 1), None)
    for run in runs:
        print_run(run, base)
    if len(runs) > 1:
        same = all({r["name"]: r["dG_ion_kcal_mol"] for r in runs[0]["records"]}
                   == {r["name"]: r["dG_ion_kcal_mol"] for r in run["records"]} for run in runs[1:])
        print(f"\nidentical ΔG_ion on every worker count: {same}")
    payload = {"label": args.label, "set": str(SET.name), "substrates": [r["name"] for r in rows], "runs": runs}
    if args.compare:
        payload["comparison"] = compare(Path(args.compare), payload)
    out = Path(args.out) if args.out else RESULTS / f"druglike_{args.label}.json"
    if out.parent.resolve() == RESULTS.resolve():
        path = save(out.stem, payload)
    else:
        out.parent.mkdir(parents=True, exist_ok=True)
        out.write_text(json.dumps({"measured": time.strftime("%Y-%m-%d %H:%M %Z"), "machine": machine(), **payload},
                                  indent=2) + "\n", encoding="utf-8")
        path = out
    print(f"wrote {path}")


if __name__ == "__main__":
    main()
