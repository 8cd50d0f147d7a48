"""How much of the HIA error sits in the thermal corrections taken from GFN2-xTB Hessians under DFT energies.

For the smallest cations of the bundled gas-phase HIA set and their hydride
adducts (and the tert-butyl anchor pair), the structure is optimised at a DFT
level (default B3LYP-D3BJ/def2-SVP, analytic PySCF gradients, LBFGS to
max |F| < 0.005 eV/Å), a central-difference Hessian of DFT gradients is
computed, and the ideal-gas quasi-RRHO thermochemistry is evaluated exactly as
the pipeline does (same point group, symmetry number, temperature, pressure
and quasi-RRHO settings).  The thermal part of the HIA,

    δ_thermal = [H − E](R⁺) − [H − E](R–H) − ([H − E](anchor⁺) − [H − E](anchor–H)),

(the H⁻ terms cancel in the exchange; δ_thermal enters the HIA with a plus sign)

is compared between the GFN2-xTB Hessian (the stored GFN2-xTB result) and the
DFT Hessian; their difference is what the DFT//xTB composite gets wrong by
taking its thermal corrections from GFN2-xTB.  ZPE differences are listed too.

    OMP_NUM_THREADS=2 python benchmarks/thermal_corrections.py --store S --lock /tmp/cationcalc-heavy.lock

Results (resumable per species) go to benchmarks/results/thermal_corrections.json and .md.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

import numpy as np
from ase.data import atomic_masses

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from cationcalc.chem import thermo, units  # noqa: E402
from cationcalc.chem.reference import hia_reference, load_table  # noqa: E402
from cationcalc.chem.symmetry import point_group  # noqa: E402
from cationcalc.compute.hessian import numerical_hessian  # noqa: E402
from cationcalc.compute.models import Settings  # noqa: E402
from cationcalc.compute.optimize import optimize  # noqa: E402
from cationcalc.engines.pyscf_engine import DFTEngine  # noqa: E402
from cationcalc.execution.executors import SpeciesFailure  # noqa: E402
from cationcalc.execution.refine import parse_level  # noqa: E402

from dft_levels import computed_pairs, held, hydride_pair, resumable  # noqa: E402

#: the smallest rows of the gas-phase set (a DFT Hessian costs 6N gradients)
DEFAULT_ROWS = ("methyl", "ethyl", "2-propyl", "allyl", "acetyl (ATcT-based acetaldehyde)", "trifluoromethyl",
                "formyl HCO+")
FMAX = 0.005


def dft_thermal(result, level, threads: int, settings: Settings) -> dict:
    """DFT geometry, Hessian and thermochemistry of one GFN2-xTB result: H − E, G − E, ZPE (kcal/mol)."""
    lvl = parse_level(level)
    engine = DFTEngine(lvl.name, lvl.functional.xc, lvl.pyscf_basis, grid_level=lvl.functional.grid_level,
                       threads=threads)
    start = time.perf_counter()
    opt = optimize(result.numbers, result.positions_angstrom, engine, charge=result.charge,
                   multiplicity=result.multiplicity, fmax=FMAX, max_steps=300)
    hessian = numerical_hessian(result.numbers, opt.positions, engine, charge=result.charge,
                                multiplicity=result.multiplicity)
    masses = np.array([atomic_masses[z] for z in result.numbers])
    modes = thermo.vibrational_analysis(hessian, masses, opt.positions)
    group = point_group(result.numbers, opt.positions, settings.symmetry_tolerance_angstrom)
    qrrho = thermo.QuasiRRHO(cutoff_cm1=settings.qrrho_cutoff_cm1, alpha=settings.qrrho_alpha,
                             average_moment_kg_m2=settings.qrrho_average_moment_kg_m2)
    freqs = modes.frequencies_cm1  # soft imaginary modes count as real low modes, as in the pipeline
    freqs = np.where((freqs < 0) & (freqs > -settings.imaginary_threshold_cm1), -freqs, freqs)
    t = thermo.thermochemistry(freqs, masses, opt.positions, group.symmetry_number,
                               spin_multiplicity=result.multiplicity, temperature_k=settings.temperature_k,
                               pressure_pa=settings.pressure_pa, qrrho=qrrho)
    return {"H_minus_E": t.enthalpy_correction_kcal_mol, "G_minus_E": t.gibbs_correction_kcal_mol,
            "zpe": t.zpe_kcal_mol, "imaginary": int((modes.frequencies_cm1 < 0).sum()),
            "symmetry_number": group.symmetry_number, "converged": bool(opt.converged),
            "gradients": engine.counters.calls, "seconds": time.perf_counter() - start}


def xtb_thermal(result) -> dict:
    """The same quantities from the stored GFN2-xTB result (its lowest conformer's E, the ensemble's H and G)."""
    return {"H_minus_E": (result.H_hartree - result.E_hartree) * units.HARTREE_TO_KCAL_MOL,
            "G_minus_E": (result.G_hartree - result.E_hartree) * units.HARTREE_TO_KCAL_MOL,
            "zpe": result.zpe_kcal_mol}


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--level", default="B3LYP-D3BJ/def2-SVP")
    parser.add_argument("--rows", default=",".join(DEFAULT_ROWS))
    parser.add_argument("--threads", type=int, default=2)
    parser.add_argument("--store", default=None)
    parser.add_argument("--lock", default=None, help="lock file held around each species")
    parser.add_argument("--output", default=str(HERE / "results" / "thermal_corrections"))
    args = parser.parse_args(argv)


    out_json, out_md = Path(args.output + ".json"), Path(args.output + ".md")
    saved = resumable(out_json, "species")
    settings = Settings()
    rows = {r["name"]: r for r in load_table("gas_hydride_ion_affinities")}
    pairs = {"tert-butyl (anchor)": hydride_pair(hia_reference("tert-butyl").cation_smiles)}
    for name in [n.strip() for n in args.rows.split(",") if n.strip()]:
        pairs[name] = hydride_pair(rows[name]["cation_smiles"])
    species, xtb = computed_pairs(pairs, settings, args.store, args.lock)
    for sp in species:
        key = f"{sp.smiles}|{sp.charge}"
        if key in saved["species"] or isinstance(xtb[sp], SpeciesFailure):
            continue
        with held(args.lock):
            dft = dft_thermal(xtb[sp], args.level, args.threads, settings)
        saved["species"][key] = {"xtb": xtb_thermal(xtb[sp]), "dft": dft}
        print(f"{sp.smiles}: {dft['gradients']} gradients, {dft['seconds']:.0f} s", file=sys.stderr, flush=True)
        out_json.write_text(json.dumps(saved, indent=1))
    table = thermal_table(pairs, saved["species"])
    saved.update({"level": args.level, "table": table, "date": time.strftime("%Y-%m-%d")})
    out_json.write_text(json.dumps(saved, indent=1))
    out_md.write_text(markdown(saved))
    print(out_md.read_text())
    return 0


def thermal_table(pairs: dict, done: dict) -> list[dict]:
    """Per cation: the thermal part of its HIA (cation minus adduct, minus the same for the anchor pair) from
    each Hessian, and the change of the HIA when the DFT Hessian replaces the GFN2-xTB one."""
    def part(pair, source, quantity):
        cation, adduct = (done.get(f"{sp.smiles}|{sp.charge}") for sp in pair)
        if cation is None or adduct is None:
            return None
        return cation[source][quantity] - adduct[source][quantity]

    anchor = pairs["tert-butyl (anchor)"]
    out = []
    for name, pair in pairs.items():
        if name.startswith("tert-butyl"):
            continue
        row = {"cation": name}
        for source in ("xtb", "dft"):
            for quantity in ("H_minus_E", "zpe"):
                own, ref = part(pair, source, quantity), part(anchor, source, quantity)
                row[f"{quantity}_{source}"] = None if own is None or ref is None else own - ref
        if row["H_minus_E_xtb"] is not None and row["H_minus_E_dft"] is not None:
            row["hia_change_kcal_mol"] = row["H_minus_E_dft"] - row["H_minus_E_xtb"]
        out.append(row)
    return out


def markdown(saved: dict) -> str:
    lines = ["# Thermal corrections: GFN2-xTB Hessian against a DFT Hessian", "",
             f"Thermal part of the isodesmic HIA (cation minus adduct, minus the same for the tert-butyl anchor "
             f"pair), kcal/mol, 298.15 K, quasi-RRHO as in the pipeline; DFT: {saved['level']} geometry and "
             f"central-difference Hessian of analytic gradients; {saved['date']}.", "",
             "| cation | Δ(H−E) GFN2-xTB | Δ(H−E) DFT | change of the HIA | ΔZPE GFN2-xTB | ΔZPE DFT |",
             "|---|---|---|---|---|---|"]
    fmt = lambda v: "" if v is None else f"{v:+.2f}"  # noqa: E731
    changes = []
    for r in saved["table"]:
        lines.append(f"| {r['cation']} | {fmt(r['H_minus_E_xtb'])} | {fmt(r['H_minus_E_dft'])} | "
                     f"{fmt(r.get('hia_change_kcal_mol'))} | {fmt(r['zpe_xtb'])} | {fmt(r['zpe_dft'])} |")
        if r.get("hia_change_kcal_mol") is not None:
            changes.append(abs(r["hia_change_kcal_mol"]))
    if changes:
        lines += ["", f"Mean |change| {np.mean(changes):.2f} kcal/mol, max {max(changes):.2f} (n {len(changes)})."]
    return "\n".join(lines) + "\n"


if __name__ == "__main__":
    sys.exit(main())
