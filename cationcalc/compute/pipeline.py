"""One species, top to bottom: SMILES → conformers → GFN2-xTB → thermochemistry.

:func:`compute_species` is a sequence of named steps, each a function below it:

1. ``_embed``: conformers from RDKit (ETKDGv3, force-field clean-up);
2. ``_screen``: GFN2-xTB single points keep the lowest few;
3. ``_optimise_and_guard``: optimise each and compare its bonds with the
   species asked for (the bonding guard);
4. ``_bonding_outcome``: a conformer whose bonds changed is set aside (and
   reported); only when every conformer changed does the result belong to
   the relaxed species (``rearranged``);
5. ``_distinct_in_window``: remove duplicate conformers, keep those within
   the energy window;
6. :func:`vibrate`: numerical Hessian for each (``Settings.hessian_conformers``:
   every conformer, the lowest only with its vibrational correction
   transferred to the others, or none at the screening level), follow small imaginary modes
   (displace and re-optimise to a tight gradient), warn about large ones (a
   saddle point: a carbocation that wants to rearrange or bridge, or for
   other species an unresolved flat torsion), then the symmetry number from
   the geometry and the quasi-RRHO thermochemistry;
7. ``_ensemble``: the Boltzmann ensemble, and in solution the 1 atm → 1 mol/L
   standard state;
8. ``_conformer_records`` and ``_species_result``: the result.

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
from dataclasses import dataclass, replace
from typing import Sequence

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


@dataclass(frozen=True)
class SpeciesJob:
    """What every step needs about the species being computed: who, how, with which engine."""

    species: Species
    settings: Settings
    engine: Engine
    numbers: list[int]
    #: bonds of the species as asked for (the bonding guard compares every optimised geometry with them)
    reference_bonds: frozenset[tuple[int, int]]

    @property
    def engine_keywords(self) -> dict:
        """Charge, multiplicity and solvent, as every engine call takes them."""
        return dict(charge=self.species.charge, multiplicity=self.species.multiplicity,
                    solvent=self.settings.solvent)


@dataclass(eq=False)
class Conformer:
    """One optimised conformer on its way through the steps (each step returns a new one)."""

    opt: OptimizationResult
    change: BondingChange
    positions: np.ndarray
    energy_ev: float
    thermo: thermo.Thermochemistry | None = None
    frequencies_cm1: np.ndarray | None = None
    #: point group of the final geometry (set with the thermochemistry)
    group: PointGroup | None = None
    note: str = ""


@dataclass(frozen=True)
class Vibration:
    """One conformer after imaginary-mode following (and thermochemistry), the warnings and the engine calls."""

    conformer: Conformer
    warnings: tuple[str, ...] = ()
    hessian_calls: int = 0
    optimization_calls: int = 0


@dataclass(frozen=True)
class _BondingOutcome:
    """Which optimised conformers carry on, which were set aside, and whether the species relaxed."""

    pool: list[Conformer]
    set_aside: list[Conformer]
    rearranged: bool
    warnings: list[str]


@dataclass(frozen=True)
class _Ensemble:
    """The Boltzmann ensemble of the conformers in the window (kcal/mol, J/(mol K))."""

    window: list[Conformer]  #: sorted by energy
    mirror_images: list[int]  #: 2 for a chiral conformer whose unsampled mirror image is counted
    e_min_ev: float
    g_kcal: np.ndarray  #: E + G correction of each conformer in the window
    weights: np.ndarray
    g_ens: float
    h_ens: float
    s_ens: float
    zpe: float
    best: Conformer  #: the lowest in G
    standard_state_correction: float


def compute_species(sp: Species, settings: Settings = Settings(), engine: Engine | None = None,
                    seeds: Sequence[np.ndarray] = ()) -> SpeciesResult:
    """Compute one species; raises ComputationError with a one-line reason.

    ``seeds``: further starting geometries (Å, in the species' atom order), optimised beside the
    conformers the search keeps, e.g. a lower structure of this species found elsewhere in a run.
    """
    start = time.perf_counter()
    engine = engine or get_engine(settings.engine, max_iterations=settings.scf_max_iterations)
    calls0, seconds0 = engine.counters.snapshot()
    mol, geometries = _embed(sp, settings)
    job = SpeciesJob(sp, settings, engine, [a.GetAtomicNum() for a in mol.GetAtoms()], bonds_from_mol(mol))
    screened, n_screened = _screen(job, geometries)
    screened = screened + [np.asarray(g, dtype=float) for g in seeds]
    optimised, optimisation_calls = _optimise_and_guard(job, screened)
    outcome = _bonding_outcome(job, optimised)
    distinct, window = _distinct_in_window(mol, job, outcome.pool)
    vibrations = _vibrate_window(job, window)
    followed = {id(c): v.conformer for c, v in zip(window, vibrations)}
    distinct = [followed.get(id(c), c) for c in distinct]
    ensemble = _ensemble(mol, job, [v.conformer for v in vibrations])
    counts = {"conformer_screen": n_screened,
              "optimization": optimisation_calls + sum(v.optimization_calls for v in vibrations),
              "hessian": sum(v.hessian_calls for v in vibrations)}
    warnings = outcome.warnings + [w for v in vibrations for w in v.warnings]
    calls1, seconds1 = engine.counters.snapshot()
    profile = Profile(wall_s=time.perf_counter() - start, engine_s=seconds1 - seconds0, gradients=counts)
    return _species_result(job, ensemble, _conformer_records(job, distinct, ensemble, outcome),
                           outcome.rearranged, len(geometries), warnings, profile)


# ---------------------------------------------------------------------------------------------
# 1.–3. embed, screen, optimise and guard, bonding outcome
# ---------------------------------------------------------------------------------------------

def _embed(sp: Species, settings: Settings) -> tuple[Chem.Mol, list[np.ndarray]]:
    """RDKit conformers of the species (ETKDGv3, force-field clean-up)."""
    try:
        return embed_conformers(sp.smiles, settings.conformers)
    except RuntimeError as exc:
        raise ComputationError(str(exc)) from exc


def _screen(job: SpeciesJob, geometries: list[np.ndarray]) -> tuple[list[np.ndarray], int]:
    """The lowest few geometries by single-point energy (all of them when few), and the single points spent."""
    keep = job.settings.conformers.n_optimize
    if len(geometries) <= keep:
        return geometries, 0
    screened = []
    for g in geometries:
        screened.append((job.engine.compute(job.numbers, g, **job.engine_keywords).energy_ev, len(screened), g))
    return [g for _, _, g in sorted(screened, key=lambda t: (t[0], t[1]))[:keep]], len(geometries)


def _optimise_and_guard(job: SpeciesJob, geometries: list[np.ndarray]) -> tuple[list[Conformer], int]:
    """Optimise each geometry and compare its bonds with the species asked for; returns the engine calls."""
    settings, engine = job.settings, job.engine
    optimised, calls = [], 0
    for g in geometries:
        before = engine.counters.calls
        opt = optimize(job.numbers, g, engine, fmax=settings.fmax_ev_per_angstrom, max_steps=settings.max_steps,
                       optimizer=settings.optimizer, **job.engine_keywords)
        calls += engine.counters.calls - before
        change = compare_bonding(job.reference_bonds, job.numbers, opt.positions, job.species.charge)
        optimised.append(Conformer(opt, change, opt.positions, opt.energy_ev))
    return optimised, calls


def _bonding_outcome(job: SpeciesJob, optimised: list[Conformer]) -> _BondingOutcome:
    """Converged conformers that kept their bonds carry on; only when none did, the relaxed species does."""
    sp, settings, numbers = job.species, job.settings, job.numbers
    converged = [c for c in optimised if c.opt.converged]
    if not converged:
        worst = min(optimised, key=lambda c: c.opt.max_force_ev_per_angstrom)
        raise ComputationError(
            f"{sp.smiles}: geometry optimisation did not converge in {settings.max_steps} steps "
            f"(last max force {worst.opt.max_force_ev_per_angstrom:.3g} eV/Å > {settings.fmax_ev_per_angstrom}); "
            "raise max_steps or loosen fmax")
    intact = [c for c in converged if not c.change.changed]
    changed = [c for c in converged if c.change.changed]
    warnings = []
    if intact:
        warnings = [f"{sp.smiles}: a conformer changed its bonding on optimisation "
                    f"({c.change.describe(numbers)}) and was set aside" for c in changed]
        return _BondingOutcome(intact, changed, False, warnings)
    lowest = min(changed, key=lambda c: c.energy_ev)
    pool = [c for c in changed if c.change.formed == lowest.change.formed and c.change.broken == lowest.change.broken]
    warnings.append(f"{sp.smiles}: every conformer changed its bonding on optimisation "
                    f"({lowest.change.describe(numbers)}); the values belong to the relaxed structure")
    return _BondingOutcome(pool, [], True, warnings)


# ---------------------------------------------------------------------------------------------
# 4. distinct conformers in the energy window
# ---------------------------------------------------------------------------------------------

def _masses(numbers) -> np.ndarray:
    return np.array([atomic_masses[z] for z in numbers])


def _is_duplicate(mol: Chem.Mol, a: Conformer, b: Conformer, numbers) -> bool:
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


def _distinct_in_window(mol: Chem.Mol, job: SpeciesJob,
                        pool: list[Conformer]) -> tuple[list[Conformer], list[Conformer]]:
    """(distinct conformers by energy, those within the energy window of the lowest)."""
    distinct: list[Conformer] = []
    for c in sorted(pool, key=lambda c: c.energy_ev):
        if not any(_is_duplicate(mol, c, d, job.numbers) for d in distinct):
            distinct.append(c)
    e_min = distinct[0].energy_ev
    window_kcal_mol = job.settings.conformers.window_kcal_mol
    return distinct, [c for c in distinct if (c.energy_ev - e_min) * units.EV_TO_KCAL_MOL <= window_kcal_mol]


# ---------------------------------------------------------------------------------------------
# 5. imaginary-mode following, 6. thermochemistry of one conformer
# ---------------------------------------------------------------------------------------------

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


#: the note of a conformer whose vibrational thermal correction is the lowest conformer's
TRANSFERRED_NOTE = "vibrations of the lowest conformer"
#: the note of a conformer at the screening level (no Hessian)
ENERGY_ONLY_NOTE = "electronic energy only (screening level)"


def _vibrate_window(job: SpeciesJob, window: list[Conformer]) -> list[Vibration]:
    """Thermochemistry of every conformer in the window, with as many Hessians as the settings ask for.

    'lowest': the lowest conformer gets the Hessian and mode following; the others keep their own
    electronic energy, point group and moments of inertia and take its vibrational frequencies
    (conformers of one species differ mostly in torsions, whose low modes the quasi-RRHO treats as
    rotors; the error on ΔG_ion is measured in benchmarks/druglike.py).
    """
    mode = job.settings.hessian_conformers
    if mode == "none":
        return [Vibration(_energy_only(job, c)) for c in window]
    if mode == "all" or len(window) == 1:
        return [vibrate(job, c) for c in window]
    lowest = vibrate(job, window[0])
    frequencies = lowest.conformer.frequencies_cm1
    others = [Vibration(_with_thermochemistry(job, replace(c, frequencies_cm1=frequencies, note=TRANSFERRED_NOTE)))
              for c in window[1:]]
    return [lowest] + others


def _energy_only(job: SpeciesJob, conf: Conformer) -> Conformer:
    """The conformer at the screening level: point group, no vibrations, thermal corrections of zero."""
    group = point_group(job.numbers, conf.positions, job.settings.symmetry_tolerance_angstrom)
    zero = thermo.Thermochemistry(
        temperature_k=job.settings.temperature_k, pressure_pa=job.settings.pressure_pa,
        symmetry_number=group.symmetry_number, spin_multiplicity=job.species.multiplicity, is_linear=False,
        zpe_kcal_mol=0.0, thermal_energy_kcal_mol=0.0, enthalpy_correction_kcal_mol=0.0, entropy_J_mol_K=0.0,
        s_translational_J_mol_K=0.0, s_rotational_J_mol_K=0.0, s_vibrational_J_mol_K=0.0,
        s_electronic_J_mol_K=0.0, gibbs_correction_kcal_mol=0.0, used_qrrho=False, n_imaginary_ignored=0)
    return replace(conf, group=group, thermo=zero, frequencies_cm1=np.zeros(0), note=ENERGY_ONLY_NOTE)


def vibrate(job: SpeciesJob, conf: Conformer) -> Vibration:
    """Hessian, imaginary-mode following and thermochemistry for one conformer (a new conformer, nothing mutated)."""
    if len(job.numbers) == 1:
        followed = Vibration(replace(conf, frequencies_cm1=np.zeros(0)))
    else:
        followed = _follow_imaginary_modes(job, conf)
    return replace(followed, conformer=_with_thermochemistry(job, followed.conformer))


def _hessian_modes(job: SpeciesJob, positions: np.ndarray) -> tuple[thermo.VibrationalModes, int]:
    """Normal modes from a numerical Hessian at ``positions``, and the engine calls it took."""
    before = job.engine.counters.calls
    hessian = numerical_hessian(job.numbers, positions, job.engine,
                                step_angstrom=job.settings.hessian_step_angstrom,
                                scheme=job.settings.hessian_difference, **job.engine_keywords)
    calls = job.engine.counters.calls - before
    return thermo.vibrational_analysis(hessian, _masses(job.numbers), positions), calls


def _displaced(positions: np.ndarray, vib: thermo.VibrationalModes, imaginary: np.ndarray,
               attempt: int) -> np.ndarray:
    """``positions`` moved 0.15 Å (largest atom) along every imaginary mode, the other way on odd attempts."""
    displaced = positions.copy()
    for idx in imaginary:
        mode = vib.modes[idx]
        displaced = displaced + 0.15 * mode / max(np.abs(mode).max(), 1e-12) * (1 if attempt % 2 == 0 else -1)
    return displaced


def _surviving_modes(job: SpeciesJob, conf: Conformer, freqs: np.ndarray, listing: str,
                     attempt: int) -> tuple[Conformer, str]:
    """The conformer (a saddle point when the modes are large) and the warning once mode following gave up."""
    if freqs[freqs < 0].min() <= -job.settings.imaginary_threshold_cm1:
        return replace(conf, note="saddle point"), saddle_warning(job.species, listing, attempt)
    return conf, (f"{job.species.smiles}: small imaginary mode(s) ({listing} cm-1) remain after {attempt} "
                  "displacements; counted as real low modes (|ν|) in the thermochemistry")


def _follow_imaginary_modes(job: SpeciesJob, conf: Conformer) -> Vibration:
    """Follow every imaginary mode downhill (displace, re-optimise tighter) until none is left or attempts run out.

    A methyl-rotation saddle is harmless; a mode that leads to new bonds is not, and is reported
    instead of followed.
    """
    settings, sp = job.settings, job.species
    warnings: list[str] = []
    hessian_calls = optimisation_calls = 0
    vib = None
    for attempt in range(settings.max_mode_follows + 1):
        if vib is None:  # a new geometry needs a new Hessian
            vib, calls = _hessian_modes(job, conf.positions)
            hessian_calls += calls
        freqs = vib.frequencies_cm1
        imaginary = np.where(freqs < 0)[0]
        if imaginary.size == 0:
            break
        listing = ", ".join(f"{-f:.0f}i" for f in freqs[imaginary])
        if attempt == settings.max_mode_follows:
            conf, warning = _surviving_modes(job, conf, freqs, listing, attempt)
            warnings.append(warning)
            break
        before = job.engine.counters.calls
        # a flat torsion (methyl, ester C–O) is left near its top by an optimisation stopped at the
        # ordinary fmax; after a displacement the re-optimisation runs to a tighter gradient
        opt = optimize(job.numbers, _displaced(conf.positions, vib, imaginary, attempt), job.engine,
                       fmax=settings.fmax_ev_per_angstrom * MODE_FOLLOW_FMAX_FACTOR, max_steps=settings.max_steps,
                       optimizer=settings.optimizer, **job.engine_keywords)
        optimisation_calls += job.engine.counters.calls - before
        change = compare_bonding(job.reference_bonds, job.numbers, opt.positions, sp.charge)
        if change.changed and not conf.change.changed:
            conf = replace(conf, note="saddle point")
            warnings.append(f"{sp.smiles}: a saddle point ({listing} cm-1); following the mode changes the "
                            f"bonding ({change.describe(job.numbers)}): the structure asked for is not a minimum "
                            "at this level; kept it, the imaginary mode(s) left out")
            break
        if not opt.converged or opt.energy_ev > conf.energy_ev + 1e-5:
            continue  # try the other direction along the same modes
        conf = replace(conf, opt=opt, positions=opt.positions, energy_ev=opt.energy_ev, change=change)
        vib = None
    return Vibration(replace(conf, frequencies_cm1=freqs), tuple(warnings), hessian_calls, optimisation_calls)


def _with_thermochemistry(job: SpeciesJob, conf: Conformer) -> Conformer:
    """The conformer with its point group and quasi-RRHO (or RRHO) thermochemistry."""
    settings, freqs = job.settings, conf.frequencies_cm1
    group = point_group(job.numbers, conf.positions, settings.symmetry_tolerance_angstrom)
    qrrho = thermo.QuasiRRHO(cutoff_cm1=settings.qrrho_cutoff_cm1, alpha=settings.qrrho_alpha,
                             average_moment_kg_m2=settings.qrrho_average_moment_kg_m2) if settings.qrrho else None
    # a small imaginary mode that survives mode following is a flat torsion the numerical Hessian
    # cannot resolve: count it as a real low mode (the quasi-RRHO treats it as a rotor), so G does
    # not jump by ~1 kcal/mol between a 15i and a 15 cm-1 result; saddle-point modes stay out
    soft = (freqs < 0) & (freqs > -settings.imaginary_threshold_cm1) & (conf.note != "saddle point")
    result = thermo.thermochemistry(np.where(soft, -freqs, freqs), _masses(job.numbers), conf.positions,
                                    group.symmetry_number, spin_multiplicity=job.species.multiplicity,
                                    temperature_k=settings.temperature_k, pressure_pa=settings.pressure_pa,
                                    qrrho=qrrho)
    return replace(conf, group=group, thermo=result)


# ---------------------------------------------------------------------------------------------
# 7. the ensemble, 8. the records
# ---------------------------------------------------------------------------------------------

def _mirrored(conf: Conformer) -> Conformer:
    """The mirror image of a conformer (x → −x), same energy."""
    return Conformer(conf.opt, conf.change, conf.positions * np.array([-1.0, 1.0, 1.0]), conf.energy_ev)


def _has_stereocentre(mol: Chem.Mol) -> bool:
    return bool(Chem.FindMolChiralCenters(mol, includeUnassigned=True, useLegacyImplementation=False))


def _mirror_images(mol: Chem.Mol, job: SpeciesJob, window: list[Conformer]) -> list[int]:
    """2 for a chiral conformer of an achiral molecule whose mirror image was not sampled, else 1.

    Its mirror-image twin has the same G (gauche+ without gauche-, a P propeller without M).
    """
    if _has_stereocentre(mol):
        return [1] * len(window)
    return [2 if c.group.is_chiral and not any(_is_duplicate(mol, _mirrored(c), d, job.numbers)
                                               for d in window if d is not c) else 1
            for c in window]


def _ensemble(mol: Chem.Mol, job: SpeciesJob, vibrated: list[Conformer]) -> _Ensemble:
    """Boltzmann-weighted G, H, S and ZPE; enantiomer mixing and the 1 atm → 1 mol/L step when asked for."""
    settings, temperature = job.settings, job.settings.temperature_k
    window = sorted(vibrated, key=lambda c: c.energy_ev)
    g_kcal = np.array([c.energy_ev * units.EV_TO_KCAL_MOL + c.thermo.gibbs_correction_kcal_mol for c in window])
    mirror_images = _mirror_images(mol, job, window)
    degeneracy = np.array(mirror_images, dtype=float)
    rt = units.rt_kcal_mol(temperature)
    g_ens, weights = thermo.boltzmann_ensemble(g_kcal - rt * np.log(degeneracy), temperature)
    h_kcal = np.array([c.energy_ev * units.EV_TO_KCAL_MOL + c.thermo.enthalpy_correction_kcal_mol for c in window])
    h_ens = float(np.dot(weights, h_kcal))
    zpe = float(np.dot(weights, [c.thermo.zpe_kcal_mol for c in window]))
    s_ens = (h_ens - g_ens) / temperature / units.J_TO_KCAL
    best = window[int(np.argmin(g_kcal))]
    if settings.enantiomer_mixing and best.group.is_chiral and _has_stereocentre(mol):
        s_mix = thermo.enantiomer_mixing_entropy_J_mol_K()
        s_ens += s_mix
        g_ens -= temperature * s_mix * units.J_TO_KCAL
    correction = 0.0
    if settings.solvent is not None:
        correction = thermo.standard_state_correction_kcal_mol(temperature, settings.pressure_pa, 1.0)
        g_ens += correction
    return _Ensemble(window, mirror_images, window[0].energy_ev, g_kcal, weights, g_ens, h_ens, s_ens, zpe, best,
                     correction)


def _conformer_records(job: SpeciesJob, distinct: list[Conformer], ens: _Ensemble,
                       outcome: _BondingOutcome) -> list[ConformerRecord]:
    """One record per distinct conformer (weights for those in the window), then those set aside."""
    records = []
    for c in distinct:
        in_window = c in ens.window
        idx = ens.window.index(c) if in_window else None
        records.append(ConformerRecord(
            energy_hartree=c.energy_ev / units.HARTREE_EV,
            relative_energy_kcal_mol=(c.energy_ev - ens.e_min_ev) * units.EV_TO_KCAL_MOL,
            gibbs_kcal_mol=float(ens.g_kcal[idx] - ens.g_kcal.min()) if in_window else None,
            weight=float(ens.weights[idx]) if in_window else 0.0,
            mirror_images=ens.mirror_images[idx] if in_window else 1,
            converged=c.opt.converged, bonding_changed=c.change.changed, note=c.note))
    for c in outcome.set_aside:
        records.append(ConformerRecord(energy_hartree=c.energy_ev / units.HARTREE_EV,
                                       relative_energy_kcal_mol=(c.energy_ev - ens.e_min_ev) * units.EV_TO_KCAL_MOL,
                                       bonding_changed=True, note=c.change.describe(job.numbers)))
    return records


def _species_result(job: SpeciesJob, ens: _Ensemble, records: list[ConformerRecord], rearranged: bool,
                    n_embedded: int, warnings: list[str], profile: Profile) -> SpeciesResult:
    """The result of the species: the lowest-G conformer's structure, the ensemble's thermochemistry."""
    sp, settings, best = job.species, job.settings, ens.best
    freqs = best.frequencies_cm1 if best.frequencies_cm1 is not None else np.zeros(0)
    relaxed = best.change
    return SpeciesResult(
        smiles=sp.smiles, charge=sp.charge, multiplicity=sp.multiplicity, formula=sp.formula,
        key=species_key(sp.smiles, sp.charge, sp.multiplicity, settings), level=settings.level,
        engine=settings.engine, solvent=settings.solvent, temperature_k=settings.temperature_k,
        numbers=job.numbers, positions_angstrom=best.positions.tolist(),
        partial_charges=[float(q) for q in best.opt.charges],
        E_hartree=ens.e_min_ev / units.HARTREE_EV, zpe_kcal_mol=ens.zpe,
        H_hartree=ens.h_ens / units.HARTREE_TO_KCAL_MOL, G_hartree=ens.g_ens / units.HARTREE_TO_KCAL_MOL,
        S_J_mol_K=ens.s_ens, standard_state_correction_kcal_mol=ens.standard_state_correction,
        symmetry_number=best.group.symmetry_number, point_group=best.group.name,
        frequencies_cm1=[float(f) for f in freqs],
        imaginary_frequencies_cm1=[float(f) for f in freqs if f < 0],
        conformers=records, n_embedded=n_embedded,
        rearranged=rearranged, relaxed_smiles=relaxed.relaxed_smiles if rearranged else None,
        bonding_change=relaxed.describe(job.numbers) if rearranged else "",
        warnings=warnings, profile=profile,
    )
