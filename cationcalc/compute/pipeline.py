"""One species, top to bottom: SMILES → conformers → GFN2-xTB → thermochemistry.

1. embed conformers (RDKit ETKDGv3, force-field clean-up);
2. screen them with GFN2-xTB single points and optimise the lowest few;
3. the bonding guard compares each optimised conformer with the species
   asked for; a conformer whose bonds changed is set aside (and reported),
   and only when every conformer changed does the result belong to the
   relaxed species (``rearranged``);
4. remove duplicate conformers, keep those within the energy window;
5. numerical Hessian for each, follow small imaginary modes (displace and
   re-optimise to a tight gradient), warn about large ones (a saddle point:
   a carbocation that wants to rearrange or bridge, or for other species an
   unresolved flat torsion);
6. symmetry number from the geometry, quasi-RRHO thermochemistry, the
   Boltzmann ensemble, and in solution the 1 atm → 1 mol/L standard state.

Example
-------
>>> from cationcalc.compute.pipeline import compute_species
>>> from cationcalc.compute.models import Settings
>>> from cationcalc.chem.species import species
>>> r = compute_species(species("C"), Settings())
>>> r.symmetry_number, r.point_group, round(r.S_J_mol_K)
(12, 'Td', 186)
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np
from ase.data import atomic_masses
from rdkit import Chem
from rdkit.Chem import rdMolAlign

from cationcalc.chem import thermo, units
from cationcalc.chem.bonding import BondingChange, bonds_from_mol, compare_bonding
from cationcalc.chem.conformers import embed_conformers
from cationcalc.engines import get_engine
from cationcalc.engines.base import Engine
from cationcalc.compute.hessian import numerical_hessian
from cationcalc.compute.models import ConformerRecord, Profile, Settings, SpeciesResult, species_key
from cationcalc.compute.optimize import OptimizationResult, optimize
from cationcalc.chem.species import Species
from cationcalc.chem.symmetry import PointGroup, point_group


class ComputationError(RuntimeError):
    """A species could not be computed; the message says why and what to try."""


@dataclass(eq=False)
class _Conformer:
    opt: OptimizationResult
    change: BondingChange
    positions: np.ndarray
    energy_ev: float
    thermo: thermo.Thermochemistry | None = None
    frequencies_cm1: np.ndarray | None = None
    #: point group of the final geometry (set with the thermochemistry)
    group: PointGroup | None = None
    #: 2 when the conformer is chiral, the molecule is not, and its mirror image was not sampled
    mirror_images: int = 1
    note: str = ""


def _masses(numbers) -> np.ndarray:
    return np.array([atomic_masses[z] for z in numbers])


def _is_duplicate(mol: Chem.Mol, a: _Conformer, b: _Conformer, numbers) -> bool:
    """Same minimum: energies within 0.05 kcal/mol and symmetry-aware RMSD below 0.125 Å."""
    if abs(a.energy_ev - b.energy_ev) * units.EV_TO_KCAL_MOL > 0.05:
        return False
    probe, ref = Chem.Mol(mol), Chem.Mol(mol)
    for m, c in ((probe, a), (ref, b)):
        m.RemoveAllConformers()
        conf = Chem.Conformer(len(numbers))
        for i, p in enumerate(c.positions):
            conf.SetAtomPosition(i, p.tolist())
        m.AddConformer(conf, assignId=True)
    if mol.GetNumHeavyAtoms() >= 3:
        probe, ref = Chem.RemoveHs(probe), Chem.RemoveHs(ref)
    try:
        rmsd = rdMolAlign.GetBestRMS(probe, ref, maxMatches=2000)
    except Exception:
        return True
    return rmsd < 0.125


def _mirrored(conf: _Conformer) -> _Conformer:
    """The mirror image of a conformer (x → −x), same energy."""
    return _Conformer(conf.opt, conf.change, conf.positions * np.array([-1.0, 1.0, 1.0]), conf.energy_ev)


#: the re-optimisation after a displacement along an imaginary mode runs to fmax × this factor: flat
#: torsions (tert-butyl acetate's methyl and ester C–O) stop near their top at the ordinary fmax, and the
#: next Hessian then shows the same imaginary mode (measured: 60i cm-1 left after 3 displacements at
#: fmax 0.01 eV/Å, none at 0.002, 0.06 kcal/mol lower)
MODE_FOLLOW_FMAX_FACTOR = 0.2


def saddle_warning(sp: Species, listing: str, attempts: int) -> str:
    """The warning for large imaginary modes that survive mode following, in words about this species."""
    text = (f"{sp.smiles}: large imaginary mode(s) ({listing} cm-1) remain after {attempts} displacements: "
            "a saddle point, not a minimum")
    if sp.charge > 0 and "+" in sp.smiles and any(a in sp.smiles for a in ("C+", "CH+", "CH2+", "c+", "cH+")):
        return text + "; a carbocation here usually wants to rearrange or bridge"
    kind = "neutral molecule" if sp.charge == 0 else ("anion" if sp.charge < 0 else "cation")
    return text + f"; for a {kind} this usually means a flat torsion or an unconverged structure, so its G is " \
        "less certain (the imaginary mode is left out)"


def _vibrate(conf: _Conformer, numbers, sp: Species, settings: Settings, engine: Engine,
             reference_bonds, warnings: list[str], counts: dict[str, int]) -> None:
    """Hessian, imaginary-mode following and thermochemistry for one conformer, in place."""
    masses = _masses(numbers)
    kw = dict(charge=sp.charge, multiplicity=sp.multiplicity, solvent=settings.solvent)
    if len(numbers) == 1:
        freqs = np.zeros(0)
    else:
        vib = None
        for attempt in range(settings.max_mode_follows + 1):
            if vib is None:  # a new geometry needs a new Hessian
                before = engine.counters.calls
                hessian = numerical_hessian(numbers, conf.positions, engine,
                                            step_angstrom=settings.hessian_step_angstrom, **kw)
                counts["hessian"] += engine.counters.calls - before
                vib = thermo.vibrational_analysis(hessian, masses, conf.positions)
            freqs = vib.frequencies_cm1
            imaginary = np.where(freqs < 0)[0]
            if imaginary.size == 0:
                break
            listing = ", ".join(f"{-f:.0f}i" for f in freqs[imaginary])
            if attempt == settings.max_mode_follows:
                if freqs[imaginary].min() <= -settings.imaginary_threshold_cm1:
                    conf.note = "saddle point"
                    warnings.append(saddle_warning(sp, listing, attempt))
                else:
                    warnings.append(f"{sp.smiles}: small imaginary mode(s) ({listing} cm-1) remain after {attempt} "
                                    "displacements; counted as real low modes (|ν|) in the thermochemistry")
                break
            # follow every imaginary mode downhill (a methyl-rotation saddle is harmless; a
            # mode that leads to new bonds is not, and is reported instead of followed)
            displaced = conf.positions.copy()
            for idx in imaginary:
                mode = vib.modes[idx]
                displaced = displaced + 0.15 * mode / max(np.abs(mode).max(), 1e-12) * (1 if attempt % 2 == 0 else -1)
            before = engine.counters.calls
            # a flat torsion (methyl, ester C–O) is left near its top by an optimisation stopped at the
            # ordinary fmax; after a displacement the re-optimisation runs to a tighter gradient
            opt = optimize(numbers, displaced, engine, fmax=settings.fmax_ev_per_angstrom * MODE_FOLLOW_FMAX_FACTOR,
                           max_steps=settings.max_steps, optimizer=settings.optimizer, **kw)
            counts["optimization"] += engine.counters.calls - before
            change = compare_bonding(reference_bonds, numbers, opt.positions, sp.charge)
            if change.changed and not conf.change.changed:
                conf.note = "saddle point"
                warnings.append(f"{sp.smiles}: a saddle point ({listing} cm-1); following the mode changes the "
                                f"bonding ({change.describe(numbers)}): the structure asked for is not a minimum "
                                "at this level; kept it, the imaginary mode(s) left out")
                break
            if not opt.converged or opt.energy_ev > conf.energy_ev + 1e-5:
                continue  # try the other direction along the same modes
            conf.opt, conf.positions, conf.energy_ev, conf.change = opt, opt.positions, opt.energy_ev, change
            vib = None
    group = point_group(numbers, conf.positions, settings.symmetry_tolerance_angstrom)
    conf.group = group
    qrrho = thermo.QuasiRRHO(cutoff_cm1=settings.qrrho_cutoff_cm1, alpha=settings.qrrho_alpha,
                             average_moment_kg_m2=settings.qrrho_average_moment_kg_m2) if settings.qrrho else None
    conf.frequencies_cm1 = freqs
    # a small imaginary mode that survives mode following is a flat torsion the numerical Hessian
    # cannot resolve: count it as a real low mode (the quasi-RRHO treats it as a rotor), so G does
    # not jump by ~1 kcal/mol between a 15i and a 15 cm-1 result; saddle-point modes stay out
    soft = (freqs < 0) & (freqs > -settings.imaginary_threshold_cm1) & (conf.note != "saddle point")
    conf.thermo = thermo.thermochemistry(np.where(soft, -freqs, freqs), masses, conf.positions, group.symmetry_number,
                                         spin_multiplicity=sp.multiplicity, temperature_k=settings.temperature_k,
                                         pressure_pa=settings.pressure_pa, qrrho=qrrho)


def compute_species(sp: Species, settings: Settings = Settings(), engine: Engine | None = None) -> SpeciesResult:
    """Compute one species; raises ComputationError with a one-line reason."""
    start = time.perf_counter()
    engine = engine or get_engine(settings.engine, max_iterations=settings.scf_max_iterations)
    calls0, seconds0 = engine.counters.snapshot()
    counts = {"conformer_screen": 0, "optimization": 0, "hessian": 0}
    warnings: list[str] = []
    kw = dict(charge=sp.charge, multiplicity=sp.multiplicity, solvent=settings.solvent)

    # 1. conformers
    try:
        mol, geometries = embed_conformers(sp.smiles, settings.conformers)
    except RuntimeError as exc:
        raise ComputationError(str(exc)) from exc
    numbers = [a.GetAtomicNum() for a in mol.GetAtoms()]
    n_embedded = len(geometries)
    reference_bonds = bonds_from_mol(mol)

    # 2. screen with single points, optimise the lowest few
    if len(geometries) > settings.conformers.n_optimize:
        screened = []
        for g in geometries:
            screened.append((engine.compute(numbers, g, **kw).energy_ev, len(screened), g))
        counts["conformer_screen"] += len(geometries)
        geometries = [g for _, _, g in sorted(screened, key=lambda t: (t[0], t[1]))[: settings.conformers.n_optimize]]
    optimised: list[_Conformer] = []
    for g in geometries:
        before = engine.counters.calls
        opt = optimize(numbers, g, engine, fmax=settings.fmax_ev_per_angstrom, max_steps=settings.max_steps,
                       optimizer=settings.optimizer, **kw)
        counts["optimization"] += engine.counters.calls - before
        # 3. bonding guard, per conformer
        change = compare_bonding(reference_bonds, numbers, opt.positions, sp.charge)
        optimised.append(_Conformer(opt, change, opt.positions, opt.energy_ev))
    converged = [c for c in optimised if c.opt.converged]
    if not converged:
        worst = min(optimised, key=lambda c: c.opt.max_force_ev_per_angstrom)
        raise ComputationError(
            f"{sp.smiles}: geometry optimisation did not converge in {settings.max_steps} steps "
            f"(last max force {worst.opt.max_force_ev_per_angstrom:.3g} eV/Å > {settings.fmax_ev_per_angstrom}); "
            "raise max_steps or loosen fmax")
    intact = [c for c in converged if not c.change.changed]
    changed = [c for c in converged if c.change.changed]
    rearranged = not intact
    for c in changed:
        if intact:
            warnings.append(f"{sp.smiles}: a conformer changed its bonding on optimisation "
                            f"({c.change.describe(numbers)}) and was set aside")
    pool = intact or changed
    if rearranged:
        lowest = min(pool, key=lambda c: c.energy_ev)
        pool = [c for c in pool if c.change.formed == lowest.change.formed and c.change.broken == lowest.change.broken]
        warnings.append(f"{sp.smiles}: every conformer changed its bonding on optimisation "
                        f"({lowest.change.describe(numbers)}); the values belong to the relaxed structure")

    # 4. distinct conformers inside the window
    pool.sort(key=lambda c: c.energy_ev)
    distinct: list[_Conformer] = []
    for c in pool:
        if not any(_is_duplicate(mol, c, d, numbers) for d in distinct):
            distinct.append(c)
    e_min = distinct[0].energy_ev
    window = [c for c in distinct if (c.energy_ev - e_min) * units.EV_TO_KCAL_MOL <= settings.conformers.window_kcal_mol]

    # 5.–6. Hessians, thermochemistry, ensemble
    for c in window:
        _vibrate(c, numbers, sp, settings, engine, reference_bonds, warnings, counts)
    window.sort(key=lambda c: c.energy_ev)
    e_min = window[0].energy_ev
    g_kcal = np.array([c.energy_ev * units.EV_TO_KCAL_MOL + c.thermo.gibbs_correction_kcal_mol for c in window])
    # a chiral conformer of an achiral molecule has a mirror-image twin of equal G; count it
    # when the sampling did not find it (gauche+ without gauche-, a P propeller without M)
    if not _has_stereocentre(mol):
        for c in window:
            if c.group.is_chiral and not any(_is_duplicate(mol, _mirrored(c), d, numbers) for d in window if d is not c):
                c.mirror_images = 2
    degeneracy = np.array([c.mirror_images for c in window], dtype=float)
    rt = units.rt_kcal_mol(settings.temperature_k)
    g_ens, weights = thermo.boltzmann_ensemble(g_kcal - rt * np.log(degeneracy), settings.temperature_k)
    h_kcal = np.array([c.energy_ev * units.EV_TO_KCAL_MOL + c.thermo.enthalpy_correction_kcal_mol for c in window])
    h_ens = float(np.dot(weights, h_kcal))
    zpe = float(np.dot(weights, [c.thermo.zpe_kcal_mol for c in window]))
    s_ens = (h_ens - g_ens) / settings.temperature_k / units.J_TO_KCAL
    best = window[int(np.argmin(g_kcal))]
    symmetry = best.group
    if settings.enantiomer_mixing and symmetry.is_chiral and _has_stereocentre(mol):
        s_mix = thermo.enantiomer_mixing_entropy_J_mol_K()
        s_ens += s_mix
        g_ens -= settings.temperature_k * s_mix * units.J_TO_KCAL
    correction = 0.0
    if settings.solvent is not None:
        correction = thermo.standard_state_correction_kcal_mol(settings.temperature_k, settings.pressure_pa, 1.0)
        g_ens += correction
    records = []
    for c in distinct:
        in_window = c in window
        idx = window.index(c) if in_window else None
        records.append(ConformerRecord(
            energy_hartree=c.energy_ev / units.HARTREE_EV,
            relative_energy_kcal_mol=(c.energy_ev - e_min) * units.EV_TO_KCAL_MOL,
            gibbs_kcal_mol=float(g_kcal[idx] - g_kcal.min()) if in_window else None,
            weight=float(weights[idx]) if in_window else 0.0, mirror_images=c.mirror_images,
            converged=c.opt.converged, bonding_changed=c.change.changed, note=c.note))
    for c in changed if intact else []:
        records.append(ConformerRecord(energy_hartree=c.energy_ev / units.HARTREE_EV,
                                       relative_energy_kcal_mol=(c.energy_ev - e_min) * units.EV_TO_KCAL_MOL,
                                       bonding_changed=True, note=c.change.describe(numbers)))
    freqs = best.frequencies_cm1 if best.frequencies_cm1 is not None else np.zeros(0)
    calls1, seconds1 = engine.counters.snapshot()
    relaxed = best.change
    return SpeciesResult(
        smiles=sp.smiles, charge=sp.charge, multiplicity=sp.multiplicity, formula=sp.formula,
        key=species_key(sp.smiles, sp.charge, sp.multiplicity, settings), level=settings.level,
        engine=settings.engine, solvent=settings.solvent, temperature_k=settings.temperature_k,
        numbers=numbers, positions_angstrom=best.positions.tolist(),
        partial_charges=[float(q) for q in best.opt.charges],
        E_hartree=e_min / units.HARTREE_EV, zpe_kcal_mol=zpe,
        H_hartree=h_ens / units.HARTREE_TO_KCAL_MOL, G_hartree=g_ens / units.HARTREE_TO_KCAL_MOL,
        S_J_mol_K=s_ens, standard_state_correction_kcal_mol=correction,
        symmetry_number=symmetry.symmetry_number, point_group=symmetry.name,
        frequencies_cm1=[float(f) for f in freqs],
        imaginary_frequencies_cm1=[float(f) for f in freqs if f < 0],
        conformers=records, n_embedded=n_embedded,
        rearranged=rearranged, relaxed_smiles=relaxed.relaxed_smiles if rearranged else None,
        bonding_change=relaxed.describe(numbers) if rearranged else "",
        warnings=warnings,
        profile=Profile(wall_s=time.perf_counter() - start, engine_s=seconds1 - seconds0, gradients=counts),
    )


def _has_stereocentre(mol: Chem.Mol) -> bool:
    return bool(Chem.FindMolChiralCenters(mol, includeUnassigned=True, useLegacyImplementation=False))
