"""Partial Hessians: how much of ΔG_ion is lost when only the atoms near the reacting carbon are displaced.

Run:  python benchmarks/partial_hessian.py [--radii 2 3 4] [--limit N] [--out FILE]
      (wrap in ``flock /tmp/cationcalc-heavy.lock`` on a shared machine)

For the substrates of ``benchmarks/druglike.smi`` that ionize without acid
(halides and sulfonates), the first ionization site: the substrate R–X and the
cation R⁺ are computed at the default level in water without a Hessian (the
lowest conformer's optimised structure), then a full central-difference
Hessian (6N gradients) is taken on each, and the departing anion X⁻ gets its
full Hessian in both variants.

A partial Hessian displaces only the active atoms: every atom within ``r``
bonds of the reacting carbon, and in R–X the whole leaving group as well (its
free anion is treated in full, so its vibrations must be on both sides).  The
Hessian block of the active atoms, mass-weighted, is diagonalised as it is
(partial Hessian vibrational analysis: the frozen atoms have infinite mass and
pin the frame, so no translation or rotation is projected out): 3N_active
modes.  Translation and rotation stay those of the whole species.  The frozen
atoms' vibrations are left out of R–X and of R⁺ alike; what does not cancel
is the error of ΔG_ion printed here (same structures, same qRRHO treatment:
only the Hessian differs).  Cost: 6·N_active gradients instead of 6N per
species, computed here as the block of the full Hessian (identical numbers to
displacing the active atoms only, because each column is one displacement).

Prints per substrate and radius: atoms, active atoms of R–X and R⁺, Hessian
gradients full / partial, ΔG_ion thermal part (ZPE + thermal − TS, kcal/mol)
full and partial, and their difference; then per radius the mean and max of
abs(difference) and the fraction of Hessian gradients kept.  Writes
benchmarks/results/partial_hessian.json (``--name`` for another file).
"""

from __future__ import annotations

import argparse
import time
from collections import deque

import numpy as np
from rdkit import Chem

from _common import HERE, save

from cationcalc.chem import units
from cationcalc.chem.conformers import with_hydrogens
from cationcalc.chem.ionization import heterolysis_sites
from cationcalc.chem.thermo import (QuasiRRHO, _eigenvalue_to_cm1, _vibrational_energies_J_mol, vibrational_analysis,
                                    vibrational_entropy_J_mol_K)
from cationcalc.compute.hessian import numerical_hessian
from cationcalc.compute.models import Settings
from cationcalc.engines import get_engine
from cationcalc.execution.executors import compute_one

SET = HERE / "druglike.smi"
TEMPERATURE_K = 298.15


def non_acid_substrates(limit: int | None) -> list[tuple[str, str]]:
    rows = []
    for line in SET.read_text(encoding="utf-8").splitlines():
        if not line.strip() or line.startswith("#"):
            continue
        smiles, name, acid = line.split("\t")[:3]
        if acid.strip() == "no":
            rows.append((smiles, name))
    return rows[:limit] if limit else rows


def within(mol: Chem.Mol, start: int, radius: int, blocked: int | None = None) -> set[int]:
    """Atoms (hydrogens included) at most ``radius`` bonds from ``start``; ``blocked`` is not crossed."""
    seen = {start: 0}
    queue = deque([start])
    while queue:
        atom = queue.popleft()
        if seen[atom] == radius:
            continue
        for n in mol.GetAtomWithIdx(atom).GetNeighbors():
            j = n.GetIdx()
            if j not in seen and j != blocked:
                seen[j] = seen[atom] + 1
                queue.append(j)
    return set(seen)


def vibrational_free_energy_kcal_mol(frequencies_cm1: np.ndarray) -> float:
    """ZPE + thermal vibrational energy − T·S_vib of the positive wavenumbers (default quasi-RRHO)."""
    nu = np.asarray([f for f in frequencies_cm1 if f > 0.0])
    qrrho = QuasiRRHO()
    _, e_vib = _vibrational_energies_J_mol(nu, TEMPERATURE_K, qrrho)
    s_vib = vibrational_entropy_J_mol_K(nu, TEMPERATURE_K, qrrho)
    return (e_vib - TEMPERATURE_K * s_vib) * units.J_TO_KCAL


def partial_frequencies(hessian: np.ndarray, masses: np.ndarray, active: list[int]) -> np.ndarray:
    idx = np.array([3 * a + k for a in active for k in range(3)])
    block = hessian[np.ix_(idx, idx)]
    inverse_sqrt_m = np.repeat(1.0 / np.sqrt(masses[active]), 3)
    eigenvalues = np.linalg.eigvalsh(block * np.outer(inverse_sqrt_m, inverse_sqrt_m))
    return _eigenvalue_to_cm1(eigenvalues)


def species_hessian(result, settings: Settings) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    numbers = np.array(result.numbers)
    positions = np.array(result.positions_angstrom)
    hessian = numerical_hessian(numbers, positions, get_engine(settings.engine), charge=result.charge,
                                multiplicity=result.multiplicity, solvent=settings.solvent)
    masses = np.array([Chem.GetPeriodicTable().GetAtomicWeight(int(z)) for z in numbers])
    return hessian, masses, positions


def full_g_vib(hessian, masses, positions) -> float:
    modes = vibrational_analysis(hessian, masses, positions)
    return vibrational_free_energy_kcal_mol(modes.frequencies_cm1)


def measure(smiles: str, name: str, radii: list[int], settings: Settings) -> dict:
    site = heterolysis_sites(smiles)[0]
    row = {"name": name, "input": smiles, "cation": site.cation.smiles, "leaving_group": site.leaving_group}
    computed = {}
    for role, sp in (("substrate", site.substrate), ("cation", site.cation), ("departing", site.departing)):
        result = compute_one(sp, settings.model_copy(update={"hessian_conformers": "none"}))
        if not hasattr(result, "positions_angstrom"):
            return {**row, "error": f"{role}: {result}"}
        mol = with_hydrogens(sp.smiles)
        if [a.GetAtomicNum() for a in mol.GetAtoms()] != list(result.numbers):
            return {**row, "error": f"{role}: atom order differs from the SMILES"}
        if result.rearranged:
            return {**row, "error": f"{role} rearranged on optimisation"}
        computed[role] = (sp, mol, result, species_hessian(result, settings))
    # the reacting carbon and the leaving atom in the substrate's own atom order
    _, sub_mol, sub_result, sub_h = computed["substrate"]
    match = sub_mol.GetSubstructMatch(Chem.AddHs(Chem.MolFromSmiles(smiles)))
    carbon, leaving = match[site.site_atom], match[site.leaving_atom]
    group = within(sub_mol, leaving, 10 ** 6, blocked=carbon)
    _, cat_mol, cat_result, cat_h = computed["cation"]
    centre = next(a.GetIdx() for a in cat_mol.GetAtoms() if a.GetSymbol() == "C" and a.GetFormalCharge() == 1)
    g_full = {role: full_g_vib(*computed[role][3]) for role in computed}
    row["atoms"] = {"substrate": len(sub_result.numbers), "cation": len(cat_result.numbers),
                    "departing": len(computed["departing"][2].numbers)}
    row["dG_vib_full_kcal_mol"] = round(g_full["cation"] + g_full["departing"] - g_full["substrate"], 3)
    row["gradients_full"] = 6 * (row["atoms"]["substrate"] + row["atoms"]["cation"])
    row["radii"] = {}
    for radius in radii:
        active_sub = sorted(within(sub_mol, carbon, radius) | group)
        active_cat = sorted(within(cat_mol, centre, radius))
        g_sub = vibrational_free_energy_kcal_mol(partial_frequencies(sub_h[0], sub_h[1], active_sub))
        g_cat = vibrational_free_energy_kcal_mol(partial_frequencies(cat_h[0], cat_h[1], active_cat))
        dg_partial = g_cat + g_full["departing"] - g_sub
        row["radii"][str(radius)] = {
            "active": {"substrate": len(active_sub), "cation": len(active_cat)},
            "gradients": 6 * (len(active_sub) + len(active_cat)),
            "dG_vib_partial_kcal_mol": round(dg_partial, 3),
            "error_kcal_mol": round(dg_partial - row["dG_vib_full_kcal_mol"], 3),
            "frozen_substrate_kcal_mol": round(g_full["substrate"] - g_sub, 3),
            "frozen_cation_kcal_mol": round(g_full["cation"] - g_cat, 3),
        }
    return row


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--radii", type=int, nargs="+", default=[2, 3, 4])
    parser.add_argument("--limit", type=int, default=None)
    parser.add_argument("--name", default="partial_hessian", help="results file name under benchmarks/results/")
    args = parser.parse_args()
    settings = Settings(solvent="water")
    start = time.perf_counter()
    rows = []
    for smiles, name in non_acid_substrates(args.limit):
        t0 = time.perf_counter()
        row = measure(smiles, name, args.radii, settings)
        row["wall_s"] = round(time.perf_counter() - t0, 1)
        rows.append(row)
        if row.get("error"):
            print(f"{name}: {row['error']}")
            continue
        cells = "  ".join(f"r{r}: {v['active']['substrate']}/{v['active']['cation']} active, "
                          f"{v['gradients']} grad, err {v['error_kcal_mol']:+.2f}" for r, v in row["radii"].items())
        print(f"{name:40s} {row['atoms']['substrate']:3d}/{row['atoms']['cation']:3d} atoms, full "
              f"{row['gradients_full']} grad, dG_vib {row['dG_vib_full_kcal_mol']:+.2f} | {cells}", flush=True)
    summary = {}
    ok = [r for r in rows if not r.get("error")]
    for radius in map(str, args.radii):
        errors = np.array([abs(r["radii"][radius]["error_kcal_mol"]) for r in ok])
        kept = sum(r["radii"][radius]["gradients"] for r in ok) / sum(r["gradients_full"] for r in ok)
        summary[radius] = {"n": len(ok), "mean_abs_error_kcal_mol": round(float(errors.mean()), 3),
                           "max_abs_error_kcal_mol": round(float(errors.max()), 3),
                           "within_0.3": int((errors <= 0.3).sum()), "hessian_gradients_kept": round(kept, 3)}
        print(f"radius {radius}: n {len(ok)}, abs error mean {errors.mean():.2f} max {errors.max():.2f} kcal/mol, "
              f"{int((errors <= 0.3).sum())}/{len(ok)} within 0.3, Hessian gradients kept {kept:.0%}")
    path = save(args.name, {"settings": "GFN2-xTB/ALPB(water), lowest conformer, qRRHO, 298.15 K",
                    "radii": args.radii, "rows": rows, "summary": summary,
                    "wall_s": round(time.perf_counter() - start, 1)})
    print(f"wrote {path}")


if __name__ == "__main__":
    main()
