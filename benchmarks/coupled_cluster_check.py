"""Is the remaining DFT error of the small gas-phase HIAs the functional's or the reference value's?

For the smallest rows of the bundled gas-phase HIA set, the electronic energy
of each cation and hydride adduct is recomputed at CCSD(T)/def2-TZVP (PySCF,
RHF reference, frozen core, conventional integrals) on the same GFN2-xTB
structure (lowest conformer) that the DFT//xTB column of dft_levels.py used;
thermal corrections come from GFN2-xTB in both columns.  The HIA is taken by
hydride exchange against methyl (314.4 kcal/mol, the table's row), the
anchor small enough for CCSD(T) on two cores; the DFT column is re-anchored
on methyl from the stored single points of ``results/dft_levels.json``
(no DFT is recomputed).

If CCSD(T) lands on the published value where the functional does not, the
error is the functional's; if CCSD(T) misses by as much as the functional,
the reference value (or something both share: structures, thermal
corrections, the anchor) is in question.  def2-TZVP leaves CCSD(T) a basis
error of about 1–2 kcal/mol on such exchanges (common practice, no source).

    OMP_NUM_THREADS=2 python benchmarks/coupled_cluster_check.py --store S --lock /tmp/cationcalc-heavy.lock

Results (resumable per species) go to benchmarks/results/coupled_cluster_check.json and .md.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from cationcalc.chem.reference import hia_reference, load_table  # noqa: E402
from cationcalc.compute.models import Settings  # noqa: E402
from cationcalc.compute.properties import hydride_ion_affinity  # noqa: E402
from cationcalc.execution.executors import SpeciesFailure  # noqa: E402

from dft_levels import computed_pairs, held, hydride_pair, resumable  # noqa: E402

ANCHOR = "methyl"
DFT_LEVEL = "wB97X-D3BJ/def2-TZVP"
DEFAULT_ROWS = ("formyl HCO+", "acetyl (ATcT-based acetaldehyde)", "2-propyl", "trifluoromethyl", "allyl")


def ccsd_t_energy(result, basis: str, threads: int, max_memory_mb: float) -> dict:
    """CCSD(T) total energy (Hartree) of one GFN2-xTB structure, with its parts and cost."""
    from pyscf import cc, gto, lib, scf

    start = time.perf_counter()
    mol = gto.M(atom=[(int(z), tuple(map(float, p))) for z, p in zip(result.numbers, result.positions_angstrom)],
                basis=basis, charge=int(result.charge), spin=int(result.multiplicity) - 1, unit="Angstrom",
                verbose=0, max_memory=max_memory_mb)
    with lib.with_omp_threads(threads):
        mf = scf.RHF(mol)
        mf.conv_tol = 1e-10
        e_hf = mf.kernel()
        if not mf.converged:
            raise RuntimeError(f"{result.smiles}: RHF did not converge")
        mycc = cc.CCSD(mf).set_frozen()
        mycc.conv_tol = 1e-8
        mycc.kernel()
        if not mycc.converged:
            raise RuntimeError(f"{result.smiles}: CCSD did not converge")
        e_t = mycc.ccsd_t()
    return {"E_hartree": float(e_hf + mycc.e_corr + e_t), "E_hf_hartree": float(e_hf),
            "E_corr_ccsd_hartree": float(mycc.e_corr), "E_t_hartree": float(e_t), "n_basis": int(mol.nao_nr()),
            "seconds": time.perf_counter() - start}


def shifted(result, shift_hartree: float):
    """The GFN2-xTB result with its electronic energy replaced (thermal corrections kept)."""
    return result.model_copy(update={"E_hartree": result.E_hartree + shift_hartree,
                                     "H_hartree": result.H_hartree + shift_hartree,
                                     "G_hartree": result.G_hartree + shift_hartree})


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", default=",".join(DEFAULT_ROWS))
    parser.add_argument("--basis", default="def2-TZVP")
    parser.add_argument("--threads", type=int, default=2)
    parser.add_argument("--max-memory-mb", type=float, default=12000)
    parser.add_argument("--store", default=None, help="result store holding the GFN2-xTB species of dft_levels.py")
    parser.add_argument("--dft", default=str(HERE / "results" / "dft_levels.json"))
    parser.add_argument("--lock", default=None, help="lock file held around each CCSD(T) species")
    parser.add_argument("--output", default=str(HERE / "results" / "coupled_cluster_check"))
    args = parser.parse_args(argv)


    out_json, out_md = Path(args.output + ".json"), Path(args.output + ".md")
    saved = resumable(out_json, "ccsd_t")
    settings = Settings()
    table = {r["name"]: r for r in load_table("gas_hydride_ion_affinities")}
    anchor = hia_reference(ANCHOR)
    names = [n.strip() for n in args.rows.split(",") if n.strip()]
    pairs = {name: hydride_pair(table[name]["cation_smiles"]) for name in [ANCHOR, *names]}
    species, xtb = computed_pairs(pairs, settings, args.store, args.lock)
    failed = [sp.smiles for sp in species if isinstance(xtb[sp], SpeciesFailure)]
    if failed:
        raise SystemExit(f"GFN2-xTB failed for {', '.join(failed)}")
    dft_points = json.loads(Path(args.dft).read_text())["single_points"][DFT_LEVEL]

    for sp in species:
        key = f"{sp.smiles}|{sp.charge}|{sp.multiplicity}"
        if key in saved["ccsd_t"]:
            continue
        with held(args.lock):
            saved["ccsd_t"][key] = ccsd_t_energy(xtb[sp], args.basis, args.threads, args.max_memory_mb)
        print(f"{sp.smiles}: {saved['ccsd_t'][key]['n_basis']} bf, {saved['ccsd_t'][key]['seconds']:.0f} s",
              file=sys.stderr, flush=True)
        out_json.write_text(json.dumps(saved, indent=1))

    def level(shift_of) -> dict:
        refined = {sp: shifted(xtb[sp], shift_of(sp)) for sp in species}
        ref_cation, ref_adduct = pairs[ANCHOR]
        return {name: hydride_ion_affinity(refined[c], refined[a], refined[ref_cation], refined[ref_adduct],
                                           anchor).hia_kcal_mol for name, (c, a) in pairs.items() if name != ANCHOR}

    key = lambda sp: f"{sp.smiles}|{sp.charge}|{sp.multiplicity}"  # noqa: E731
    columns = {"GFN2-xTB raw": level(lambda sp: 0.0),
               f"{DFT_LEVEL}//GFN2-xTB": level(lambda sp: dft_points[key(sp)]["shift_hartree"]),
               f"CCSD(T)/{args.basis}//GFN2-xTB": level(
                   lambda sp: saved["ccsd_t"][key(sp)]["E_hartree"] - xtb[sp].E_hartree)}
    rows = []
    for name in names:
        exp = float(table[name]["hia_kcal_mol"])
        rows.append({"cation": name, "exp": exp, **{c: round(v[name], 2) for c, v in columns.items()},
                     **{f"error {c}": round(v[name] - exp, 2) for c, v in columns.items()}})
    mae = {c: float(np.mean([abs(r[f"error {c}"]) for r in rows])) for c in columns}
    saved.update({"anchor": f"{ANCHOR} ({anchor.hia_kcal_mol} kcal/mol; {anchor.source})", "rows": rows,
                  "mae": mae, "basis": args.basis, "date": time.strftime("%Y-%m-%d")})
    out_json.write_text(json.dumps(saved, indent=1))
    out_md.write_text(markdown(saved, list(columns)))
    print(out_md.read_text())
    return 0


def markdown(saved: dict, columns: list[str]) -> str:
    lines = ["# CCSD(T) against DFT on the same structures: small rows of the gas-phase HIA set", "",
             f"HIA (298 K, kcal/mol) by hydride exchange against {saved['anchor']}; electronic energies on the "
             f"GFN2-xTB structures, thermal corrections from GFN2-xTB in every column; CCSD(T): RHF reference, "
             f"frozen core, {saved['basis']}; {saved['date']}. Errors computed − experiment.", "",
             "| cation | exp | " + " | ".join(f"{c} (error)" for c in columns) + " |",
             "|---|---|" + "---|" * len(columns)]
    for r in saved["rows"]:
        lines.append(f"| {r['cation']} | {r['exp']} | "
                     + " | ".join(f"{r[c]:.1f} ({r[f'error {c}']:+.1f})" for c in columns) + " |")
    lines.append("| MAE | | " + " | ".join(f"{saved['mae'][c]:.1f}" for c in columns) + " |")
    base = next((r for r in saved["rows"] if r["cation"] == "2-propyl"), None)
    if base is not None:
        lines += ["", "The same errors relative to 2-propyl's (the methyl anchor taken out: what the exchange "
                  "X⁺ + propane → XH + 2-propyl⁺ gets wrong):", "",
                  "| cation | " + " | ".join(columns) + " |", "|---|" + "---|" * len(columns)]
        for r in saved["rows"]:
            if r is not base:
                lines.append(f"| {r['cation']} | " + " | ".join(
                    f"{r[f'error {c}'] - base[f'error {c}']:+.1f}" for c in columns) + " |")
    cost = saved["ccsd_t"]
    lines += ["", "CCSD(T) cost: " + ", ".join(f"{k.split('|')[0]} {v['n_basis']} bf {v['seconds']:.0f} s"
                                               for k, v in cost.items()) + "."]
    return "\n".join(lines) + "\n"


if __name__ == "__main__":
    sys.exit(main())
