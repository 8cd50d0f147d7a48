"""Accuracy and cost of every offered DFT refinement level on the bundled gas-phase HIA set.

For each cation of ``cationcalc/data/gas_hydride_ion_affinities.csv`` that
can be compared with a computed minimum, the HIA is computed by isodesmic
hydride exchange against tert-butyl (anchor 236.7 kcal/mol, Keister, Riley,
Baer 1993) with

* GFN2-xTB (raw), the screening level;
* GFN2-xTB calibrated: the stored gas-phase calibration of
  ``cationcalc.trust.calibration`` when one is bundled, otherwise a leave-one-out
  linear fit on this same set (each cation predicted by the line through the
  others; said so in the output);
* every offered DFT level of ``cationcalc.execution.refine`` as DFT//xTB: DFT single
  points on the GFN2-xTB geometries, thermal corrections from GFN2-xTB.

Rows left out, and why (from the table's own notes and the reference README):
threshold ions (1-propyl, isobutyl, neopentyl: not minima, they rearrange);
the superseded 1979 tert-butyl value; tert-butyl (1993) itself (the anchor:
zero error by construction); ethyl (bridged, and the 1979 figure is 3–4
kcal/mol above later evaluations per the table note).  Rows at T = 0 K
(benzyl, tropylium: photoionization onsets) are compared with the computed
HIA converted to 0 K with the GFN2-xTB thermal contents,
HIA₀ = HIA₂₉₈ + [H₂₉₈−H₀](R–H) − [H₂₉₈−H₀](R⁺) − (5/2)RT (H⁻ translation + pV).
Rows with status ``memory`` are included and reported separately too.

Run it inside the shared lock (2 threads for PySCF)::

    OMP_NUM_THREADS=2 flock /tmp/cationcalc-heavy.lock python benchmarks/dft_levels.py --threads 2

Results (resumable: finished single points are kept) go to
``benchmarks/results/dft_levels.json`` and the table to
``benchmarks/results/dft_levels.md``.
"""

from __future__ import annotations

import argparse
import contextlib
import fcntl
import json
import os
import platform
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from cationcalc.chem import units  # noqa: E402
from cationcalc.execution.executors import SpeciesFailure, compute_many  # noqa: E402
from cationcalc.compute.models import Settings  # noqa: E402
from cationcalc.compute.properties import hydride_ion_affinity  # noqa: E402
from cationcalc.chem.reference import hia_reference, load_table  # noqa: E402
from cationcalc.execution.refine import (offered_levels, parse_geometry_level, parse_level,  # noqa: E402
                                         refine_species)
from cationcalc.chem.species import Species, carbocation, hydride_adduct  # noqa: E402

EXCLUDED_NAMES = {"ethyl": "bridged ion; the 1979 value is 3–4 kcal/mol above later evaluations (table note)"}


def comparable_rows() -> tuple[list[dict], list[tuple[str, str]]]:
    """Rows of the gas-phase HIA table that can be compared, and (name, reason) for the others."""
    keep, left_out = [], []
    for row in load_table("gas_hydride_ion_affinities"):
        name, notes = row["name"], (row.get("notes") or "").lower()
        if "threshold" in name or "not a minimum" in notes:
            left_out.append((name, "threshold ion: not a minimum, rearranges on optimization"))
        elif "superseded" in notes:
            left_out.append((name, "superseded value (a later measurement replaces it)"))
        elif name.startswith("tert-butyl"):
            left_out.append((name, "the anchor of the hydride exchange (zero error by construction)"))
        elif name in EXCLUDED_NAMES:
            left_out.append((name, EXCLUDED_NAMES[name]))
        else:
            keep.append(row)
    return keep, left_out


def hydride_pair(cation_smiles: str) -> tuple[Species, Species]:
    """A cation of the table (singlet) and its hydride adduct, as species."""
    cation = carbocation(cation_smiles)
    return Species(cation.smiles, 1, 1), hydride_adduct(cation)


def resumable(path: Path, section: str) -> dict:
    """The result saved at ``path`` (empty when there is none yet), with ``section`` present."""
    saved = json.loads(path.read_text()) if path.exists() else {}
    saved.setdefault(section, {})
    return saved


def computed_pairs(pairs: dict, settings, store_path: str | None, lock_path: str | None) -> tuple[list, dict]:
    """The distinct species of the (cation, adduct) pairs and their GFN2-xTB results (store read, lock held)."""
    from cationcalc.execution.store import ResultStore

    species = list(dict.fromkeys(sp for pair in pairs.values() for sp in pair))
    with held(lock_path):
        return species, compute_many(species, settings, workers=1,
                                     store=ResultStore(store_path) if store_path else None)


@contextlib.contextmanager
def held(lock_path: str | None):
    """An exclusive lock on ``lock_path`` for the duration (nothing without a path)."""
    if lock_path is None:
        yield
        return
    with open(lock_path, "a") as handle:
        fcntl.flock(handle, fcntl.LOCK_EX)
        try:
            yield
        finally:
            fcntl.flock(handle, fcntl.LOCK_UN)


def thermal_content_kcal_mol(result) -> float:
    """H(T) − H(0) of a species: H − E − ZPE."""
    return (result.H_hartree - result.E_hartree) * units.HARTREE_TO_KCAL_MOL - result.zpe_kcal_mol


def hia_at(row_t: float, hia_298: float, cation_res, adduct_res) -> float:
    """The computed HIA at the temperature of the experiment (298 K as computed, or converted to 0 K)."""
    if row_t > 0:
        return hia_298
    rt = units.rt_kcal_mol(cation_res.temperature_k)
    return hia_298 + thermal_content_kcal_mol(adduct_res) - thermal_content_kcal_mol(cation_res) - 2.5 * rt


def statistics(errors: list[float]) -> dict:
    e = np.asarray(errors, dtype=float)
    return {"n": int(e.size), "mae": float(np.abs(e).mean()), "max": float(np.abs(e).max()),
            "mse": float(e.mean())} if e.size else {"n": 0, "mae": None, "max": None, "mse": None}


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--levels", default=",".join(offered_levels()), help="comma-separated levels")
    parser.add_argument("--threads", type=int, default=2, help="PySCF threads (use 2 only inside the lock)")
    parser.add_argument("--workers", type=int, default=1, help="processes for the GFN2-xTB species")
    parser.add_argument("--store", default="/tmp/cc_refine/store.sqlite", help="result store for GFN2-xTB species")
    parser.add_argument("--output", default=str(HERE / "results" / "dft_levels"), help="output path without suffix")
    parser.add_argument("--geometry", default=None,
                        help="also a DFT//DFT column per level: structures optimised at this level (e.g. "
                             "B3LYP-D3BJ/def2-SVP) before the single point")
    parser.add_argument("--names", default=None,
                        help="comma-separated row names of the gas-phase table to compute (default: every comparable row)")
    parser.add_argument("--lock", default=None,
                        help="hold this lock file around each DFT species only (lets other heavy jobs interleave)")
    args = parser.parse_args(argv)

    from pyscf import lib

    from cationcalc.execution.store import ResultStore

    out_json = Path(args.output + ".json")
    out_md = Path(args.output + ".md")
    out_json.parent.mkdir(parents=True, exist_ok=True)
    saved = json.loads(out_json.read_text()) if out_json.exists() else {}
    saved.setdefault("single_points", {})

    settings = Settings()
    anchor = hia_reference("tert-butyl")
    rows, left_out = comparable_rows()
    if args.names:
        wanted = [n.strip() for n in args.names.split(",") if n.strip()]
        unknown = sorted(set(wanted) - {r["name"] for r in rows})
        if unknown:
            parser.error(f"--names: not a comparable row of the gas-phase table: {', '.join(unknown)}")
        left_out += [(r["name"], "not asked for (--names)") for r in rows if r["name"] not in wanted]
        rows = [r for r in rows if r["name"] in wanted]
    ref_pair = hydride_pair(anchor.cation_smiles)
    pairs = {row["name"]: hydride_pair(row["cation_smiles"]) for row in rows}
    species = list(dict.fromkeys([*ref_pair, *(sp for pair in pairs.values() for sp in pair)]))

    store = ResultStore(args.store)
    t0 = time.perf_counter()
    with held(args.lock):
        xtb = compute_many(species, settings, workers=args.workers, store=store)
    print(f"GFN2-xTB: {len(species)} species in {time.perf_counter() - t0:.0f} s "
          f"(store hits {store.hits})", file=sys.stderr, flush=True)
    failed = {sp.smiles: r.message for sp, r in xtb.items() if isinstance(r, SpeciesFailure)}
    if failed:
        print(f"GFN2-xTB failures: {failed}", file=sys.stderr)

    def hia_table(res) -> dict[str, float]:
        out = {}
        for row in rows:
            c, a = pairs[row["name"]]
            if any(isinstance(res.get(sp), SpeciesFailure) or res.get(sp) is None for sp in (c, a, *ref_pair)):
                continue
            h = hydride_ion_affinity(res[c], res[a], res[ref_pair[0]], res[ref_pair[1]], anchor).hia_kcal_mol
            out[row["name"]] = hia_at(float(row["T_K"]), h, xtb[c], xtb[a])
        return out

    exp = {row["name"]: float(row["hia_kcal_mol"]) for row in rows}
    status = {row["name"]: row["status"] for row in rows}
    columns: dict[str, dict[str, float]] = {"GFN2-xTB raw": hia_table(xtb)}
    cost: dict[str, dict] = {"GFN2-xTB raw": {
        "s_per_species": float(np.mean([xtb[sp].profile.wall_s for sp in species])), "note": "full pipeline "
        "(conformers, optimisation, Hessian) from the store's recorded profile"}}

    # calibrated GFN2-xTB: stored calibration if bundled, else leave-one-out on this set
    from cationcalc.trust import calibration

    names = [n for n in exp if n in columns["GFN2-xTB raw"]]
    stored = calibration.gas_calibration("GFN2-xTB")
    if stored is not None:
        columns["GFN2-xTB calibrated"] = {n: float(stored.apply(columns["GFN2-xTB raw"][n])) for n in names}
        cal_note = f"stored calibration {stored.id} (n {stored.n}; fitted on the gas-phase set, not leave-one-out here)"
    else:
        x = np.array([columns["GFN2-xTB raw"][n] for n in names])
        y = np.array([exp[n] for n in names])
        loo = calibration.loo_predictions(x, y)
        columns["GFN2-xTB calibrated"] = dict(zip(names, map(float, loo)))
        cal_note = ("no calibration bundled: leave-one-out linear fit on this set with cationcalc.trust.calibration "
                    "(each cation predicted by the line through the others)")
    cost["GFN2-xTB calibrated"] = {"s_per_species": cost["GFN2-xTB raw"]["s_per_species"], "note": cal_note}

    levels = [parse_level(x.strip()) for x in args.levels.split(",") if x.strip()]
    geometry = parse_geometry_level(args.geometry) if args.geometry else None
    for lvl, geo in [(lvl, None) for lvl in levels] + ([(lvl, geometry) for lvl in levels] if geometry else []):
        column = lvl.name if geo is None else f"{lvl.name}//{geo.name}"
        done = saved["single_points"].setdefault(column, {})
        refined = {}
        for sp in species:
            r = xtb[sp]
            if isinstance(r, SpeciesFailure):
                continue
            key = f"{sp.smiles}|{sp.charge}|{sp.multiplicity}"
            if key in done:
                shift = done[key]["shift_hartree"]
                refined[sp] = r.model_copy(update={"E_hartree": r.E_hartree + shift, "H_hartree": r.H_hartree + shift,
                                                   "G_hartree": r.G_hartree + shift})
                continue
            with held(args.lock), lib.with_omp_threads(args.threads):
                new, info = refine_species(r, lvl, settings, threads=args.threads, force=True, geometry=geo)
            refined[sp] = new
            done[key] = {"shift_hartree": info.shift_hartree, "E_dft_hartree": info.E_dft_hartree,
                         "seconds": info.seconds, "n_basis": info.n_basis, "atoms": len(r.numbers),
                         "scf_route": info.scf_route, "estimate_s": info.estimate.seconds,
                         "dft_gradients": new.profile.gradients.get("dft_gradient", 0), "warnings": [
                             w for w in new.warnings if w not in r.warnings]}
            print(f"{column}: {sp.smiles} {info.n_basis} bf {info.seconds:.1f} s", file=sys.stderr, flush=True)
            out_json.write_text(json.dumps(saved, indent=1))
        columns[column] = hia_table(refined)
        secs = [v["seconds"] for v in done.values()]
        nbf = [v["n_basis"] for v in done.values()]
        fit = np.polyfit(np.log(np.asarray(nbf) / 100.0), np.log(secs), 1) if len(secs) > 2 else (None, None)
        largest = max(done.values(), key=lambda v: v["atoms"])
        cost[column] = {"s_per_species": float(np.mean(secs)), "s_largest": largest["seconds"],
                          "atoms_largest": largest["atoms"], "n_basis_largest": largest["n_basis"],
                          "fit_exponent": float(fit[0]) if fit[0] is not None else None,
                          "fit_seconds_at_100": float(np.exp(fit[1])) if fit[1] is not None else None}

    # thread speed-up of one single point (benzyl cation at the default level): 1 thread against the run above
    from cationcalc.execution.refine import DEFAULT_LEVEL

    benzyl = pairs.get("benzyl (0 K, onset)", (None,))[0]
    done = saved["single_points"].get(DEFAULT_LEVEL, {})
    key = f"{benzyl.smiles}|1|1" if benzyl is not None else None
    if key in done and "speedup" not in saved:
        with lib.with_omp_threads(1):
            _, one = refine_species(xtb[benzyl], DEFAULT_LEVEL, settings, threads=1, force=True)
        saved["speedup"] = {"level": DEFAULT_LEVEL, "species": benzyl.smiles, "s_1_thread": one.seconds,
                            f"s_{args.threads}_threads": done[key]["seconds"],
                            "speedup": one.seconds / done[key]["seconds"]}
        print(f"speed-up {saved['speedup']}", file=sys.stderr, flush=True)

    table = []
    for label, values in columns.items():
        errs = [values[n] - exp[n] for n in exp if n in values]
        errs_read = [values[n] - exp[n] for n in exp if n in values and status[n] != "memory"]
        table.append({"level": label, **statistics(errs), "mae_read": statistics(errs_read)["mae"],
                      "n_read": len(errs_read), **cost[label]})
    saved.update({"table": table, "per_species": {n: {"exp": exp[n], "status": status[n], **{
        label: round(values[n], 2) for label, values in columns.items() if n in values}} for n in exp},
        "left_out": left_out, "threads": args.threads, "machine": platform.processor() or platform.machine(),
        "cpus": os.cpu_count(), "calibration_note": cal_note, "date": time.strftime("%Y-%m-%d")})
    out_json.write_text(json.dumps(saved, indent=1))
    out_md.write_text(markdown(saved, columns))
    print(out_md.read_text())
    return 0


def markdown(saved: dict, columns: dict) -> str:
    lines = ["# DFT refinement levels on the gas-phase HIA set", "",
             f"HIA by isodesmic hydride exchange against tert-butyl (236.7 kcal/mol, Keister, Riley, Baer 1993); "
             f"DFT//GFN2-xTB (DFT single points on GFN2-xTB geometries, thermal corrections from GFN2-xTB). "
             f"Errors computed − experiment, kcal/mol. PySCF with {saved['threads']} OpenMP threads on "
             f"{saved['cpus']} shared cores, density fitting, {saved['date']}.", "",
             "| level | n | MAE | max error | mean signed error | MAE (no memory rows) | s/species | s for largest "
             "species (atoms, basis functions) |", "|---|---|---|---|---|---|---|---|"]
    for t in saved["table"]:
        largest = (f"{t['s_largest']:.0f} ({t['atoms_largest']}, {t['n_basis_largest']})" if "s_largest" in t
                   else "")
        lines.append(f"| {t['level']} | {t['n']} | {t['mae']:.1f} | {t['max']:.1f} | {t['mse']:+.1f} | "
                     f"{t['mae_read']:.1f} | {t['s_per_species']:.1f} | {largest} |")
    lines += ["", f"GFN2-xTB calibrated: {saved['calibration_note']}. GFN2-xTB s/species is the whole pipeline "
              "(conformers, optimisation, Hessian); DFT s/species is the single point alone.", "",
              "Per species (kcal/mol; rows at 0 K compared with the computed HIA converted to 0 K):", "",
              "| cation | exp | status | " + " | ".join(columns) + " |",
              "|---|---|---|" + "---|" * len(columns)]
    for name, v in saved["per_species"].items():
        lines.append(f"| {name} | {v['exp']} | {v['status']} | "
                     + " | ".join(f"{v.get(c, float('nan')):.1f}" for c in columns) + " |")
    if "speedup" in saved:
        sp = saved["speedup"]
        lines += ["", f"Threads: {sp['species']} at {sp['level']} took {sp['s_1_thread']:.1f} s on 1 thread, "
                  f"speed-up ×{sp['speedup']:.2f} with {saved['threads']} threads."]
    lines += ["", "Left out: " + "; ".join(f"{n} ({why})" for n, why in saved["left_out"]) + "."]
    return "\n".join(lines) + "\n"


if __name__ == "__main__":
    sys.exit(main())
