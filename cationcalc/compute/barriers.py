"""Barriers of 1,2-shifts: a minimum-energy path with NEB on the same engine.

For one shift of a cation that is a minimum, :func:`shift_barrier`

1. takes the parent's optimised geometry (atom order: ``Chem.AddHs`` of its
   canonical SMILES, as every species result in cationcalc);
2. builds the product endpoint *in the same atom order*: of the atoms that
   could migrate (the β-hydrogens, or the groups equivalent to the migrating
   one), the one best aligned with the empty p orbital of the cationic
   carbon goes to that carbon's open face (tetrahedral angle, covalent bond
   length, same side as before): a hydrogen or an acyclic group (moving
   rigidly) in one move, a ring atom in four stages of a driven distance
   pair; the new and the old bond distances are held (``FixBondLengths``)
   while the rest relaxes, then the constraints go and the structure is
   optimised freely; its bond graph must be the product's (or, for a
   product that is not a minimum, the structure it relaxes to);
3. aligns the endpoints (rotation and translation), interpolates
   ``n_images`` images with IDPP, and relaxes the band with ASE's NEB:
   first without, then with the climbing image (FIRE);
4. reports ΔE‡ = E(highest image) − E(parent endpoint), electronic, in
   kcal/mol, the transition-state geometry (the highest image, XYZ text),
   the reaction energy of the endpoints, the image profile and the runtime.

A path whose interior images never rise above both ends has no barrier on
this path: ``barrierless`` is True and ``barrier_kcal_mol`` is 0 for a
downhill step, or the (positive) reaction energy for an uphill one.

Cost is bounded: 7 images, max force 0.02 eV/Å on the band (0.5 eV/Å before
the climbing image starts), at most 1000 NEB steps; about 10 s for a C6
cation.  The band's convergence is looser than that of a geometry
optimisation (0.01 eV/Å), but not much: measured on the degenerate 1,2-H shift
of 2,3-dimethyl-2-butyl cation, the climbing image gave ΔE‡ = 12.5, 10.3, 9.24
and 9.19 kcal/mol at 0.1, 0.05, 0.02 and 0.01 eV/Å (a scan of the bridged
structure with both C–H distances held equal gave 9.17), with 9 images the
same as with 7.  The climbing image's energy converges slowly with the
force, so 0.1 eV/Å overestimates such barriers by ~3 kcal/mol.  Everything
runs in this process on one core.

Example
-------
>>> from cationcalc.compute.barriers import DEFAULT_IMAGES, DEFAULT_FMAX, xyz_text
>>> DEFAULT_IMAGES, DEFAULT_FMAX
(7, 0.02)
>>> print(xyz_text([1, 1], [[0, 0, 0], [0, 0, 0.74]], "H2"))
2
H2
H      0.000000     0.000000     0.000000
H      0.000000     0.000000     0.740000
"""

from __future__ import annotations

import time
from dataclasses import asdict, dataclass, field
from typing import Protocol

import numpy as np
from numpy.typing import ArrayLike
from ase import Atoms
from ase.build import minimize_rotation_and_translation
from ase.constraints import FixBondLengths
from ase.data import chemical_symbols, covalent_radii
from ase.optimize import FIRE, LBFGS
from rdkit import Chem

from cationcalc.chem import units
from cationcalc.chem.bonding import bonds_from_mol, compare_bonding
from cationcalc.engines import get_engine
from cationcalc.engines.base import Engine
from cationcalc.compute.models import Settings, SpeciesResult
from cationcalc.compute.optimize import EngineCalculator, optimize
from cationcalc.chem.species import InputError, carbocation

try:  # ASE ≥ 3.23
    from ase.mep import NEB
except ImportError:  # pragma: no cover - older ASE
    from ase.neb import NEB

class ShiftStep(Protocol):
    """What a barrier needs of one 1,2-shift: ``kind`` (hydride, alkyl, aryl or ring), the β-carbon the
    group leaves (``from_atom``), the cationic carbon it moves to (``to_atom``) and the migrating atom
    (for a hydride, a hydrogen in ``Chem.AddHs`` order), indices in ``Chem.MolFromSmiles(parent_smiles)``."""

    kind: str
    from_atom: int
    to_atom: int
    migrating_atom: int
    parent_smiles: str
    product_smiles: str


#: images including both ends
DEFAULT_IMAGES = 7
#: max force on the band (eV/Å) when the climbing-image NEB stops
DEFAULT_FMAX = 0.02
#: max force (eV/Å) at which the plain NEB hands over to the climbing image
PRE_CLIMB_FMAX = 0.5
#: NEB optimiser steps, both phases together
DEFAULT_MAX_STEPS = 1000
#: an interior image must rise this much (kcal/mol) above both ends to count as a barrier
BARRIER_TOLERANCE_KCAL_MOL = 0.05


@dataclass
class Barrier:
    """The NEB result of one shift (energies electronic, kcal/mol)."""

    barrier_kcal_mol: float | None
    barrierless: bool = False
    reaction_kcal_mol: float | None = None
    ts_xyz: str | None = None
    image_energies_kcal_mol: list[float] = field(default_factory=list)
    converged: bool = False
    n_gradients: int = 0
    runtime_s: float = 0.0
    endpoint_smiles: str | None = None
    message: str = ""

    def as_dict(self) -> dict:
        out = asdict(self)
        for key in ("barrier_kcal_mol", "reaction_kcal_mol"):
            if out[key] is not None:
                out[key] = round(out[key], 2)
        out["image_energies_kcal_mol"] = [round(e, 2) for e in out["image_energies_kcal_mol"]]
        out["runtime_s"] = round(out["runtime_s"], 2)
        return out


def xyz_text(numbers: ArrayLike, positions: ArrayLike, comment: str = "") -> str:
    """An XYZ block (Å)."""
    lines = [str(len(numbers)), comment]
    for z, p in zip(numbers, np.asarray(positions, dtype=float)):
        lines.append(f"{chemical_symbols[int(z)]:2s} {p[0]:12.6f} {p[1]:12.6f} {p[2]:12.6f}")
    return "\n".join(lines)


def _plane_normal(points: np.ndarray) -> np.ndarray:
    centred = points - points.mean(axis=0)
    return np.linalg.svd(centred)[2][-1]


def _moving_atoms(mol: Chem.Mol, beta: int, group: int, kind: str) -> list[int]:
    """Atoms that travel with a migrating hydrogen or acyclic group: its side of the β–group bond."""
    if kind == "hydride":
        return [group]
    seen, stack = {group}, [group]
    while stack:
        for n in mol.GetAtomWithIdx(stack.pop()).GetNeighbors():
            if n.GetIdx() != beta and n.GetIdx() not in seen:
                seen.add(n.GetIdx())
                stack.append(n.GetIdx())
    return sorted(seen)


def product_endpoint(parent: SpeciesResult, candidate: ShiftStep, settings: Settings, engine: Engine | None = None,
                     accept_smiles: set[str] = frozenset()) -> tuple[np.ndarray, str]:
    """The product geometry in the parent's atom order; raises ValueError when it cannot be built.

    Returns (positions Å, canonical SMILES of the endpoint reached).
    """
    engine = engine or get_engine(settings.engine, max_iterations=settings.scf_max_iterations)
    mol = Chem.AddHs(Chem.MolFromSmiles(candidate.parent_smiles))
    numbers = np.array([a.GetAtomicNum() for a in mol.GetAtoms()])
    if list(numbers) != list(parent.numbers):
        raise ValueError("the parent result's atoms are not in the order of its SMILES")
    pos = np.array(parent.positions_angstrom, dtype=float)
    centre, beta = candidate.to_atom, candidate.from_atom
    group = _migrating_group(mol, pos, candidate)
    bond = float(covalent_radii[numbers[centre]] + covalent_radii[numbers[group]])
    target = _landing_site(pos, centre, beta, group, bond)
    far = float(np.linalg.norm(target - pos[beta]))
    kw = dict(charge=1, multiplicity=1, solvent=settings.solvent)
    atoms, stages = _shifted_start(mol, numbers, pos, candidate, group, target, bond, far)
    atoms.calc = EngineCalculator(engine, **kw)
    _relax_through_stages(atoms, group, centre, beta, stages)
    opt = optimize(numbers, atoms.positions, engine, fmax=settings.fmax_ev_per_angstrom,
                   max_steps=settings.max_steps, optimizer=settings.optimizer, **kw)
    return opt.positions, _endpoint_reached(mol, numbers, opt.positions, candidate, group, accept_smiles)


def _migrating_group(mol, pos: np.ndarray, candidate: ShiftStep) -> int:
    """The atom on β that moves: of the β-hydrogens (or the groups equivalent to the migrating one),
    the one whose bond to β lies closest to the centre's empty p orbital."""
    centre, beta = candidate.to_atom, candidate.from_atom
    if candidate.kind == "hydride":
        options = [n.GetIdx() for n in mol.GetAtomWithIdx(beta).GetNeighbors() if n.GetAtomicNum() == 1]
    else:
        ranks = list(Chem.CanonicalRankAtoms(mol, breakTies=False))
        options = [n.GetIdx() for n in mol.GetAtomWithIdx(beta).GetNeighbors()
                   if n.GetIdx() != centre and ranks[n.GetIdx()] == ranks[candidate.migrating_atom]]
    ligands = [n.GetIdx() for n in mol.GetAtomWithIdx(centre).GetNeighbors()]
    normal = _plane_normal(pos[[centre] + ligands])

    def alignment(atom):  # |cos| between the β–X bond and the empty p orbital
        v = pos[atom] - pos[beta]
        return abs(np.dot(v, normal)) / np.linalg.norm(v)

    return max(options, key=alignment)


def _landing_site(pos: np.ndarray, centre: int, beta: int, group: int, bond: float) -> np.ndarray:
    """Where the group lands on the centre: ``bond`` Å away, tetrahedral to β, on the face it came from."""
    axis = pos[beta] - pos[centre]
    axis /= np.linalg.norm(axis)
    side = pos[group] - pos[beta]
    side = side - np.dot(side, axis) * axis
    side /= np.linalg.norm(side)
    cos_t = -1.0 / 3.0  # tetrahedral angle β–C–X, X on the face it came from
    return pos[centre] + bond * (cos_t * axis + np.sqrt(1 - cos_t ** 2) * side)


def _shifted_start(mol, numbers: np.ndarray, pos: np.ndarray, candidate: ShiftStep, group: int,
                   target: np.ndarray, bond: float, far: float) -> tuple[Atoms, list[tuple[float, float]]]:
    """The starting atoms and the (group–centre, group–β) distance stages that lead to the product."""
    centre, beta = candidate.to_atom, candidate.from_atom
    atoms = Atoms(numbers=numbers, positions=pos.copy())
    if candidate.kind != "ring":
        # a hydrogen or an acyclic group: put it on the centre's open face in one move
        moving = _moving_atoms(mol, beta, group, candidate.kind)
        atoms.positions[moving] += target - pos[group]
        return atoms, [(bond, far)]
    # a ring bond cannot jump: drive the two distances there in stages, relaxing the rest
    d_c, d_b = (float(np.linalg.norm(pos[group] - pos[x])) for x in (centre, beta))
    return atoms, [(d_c + (bond - d_c) * f, d_b + (far - d_b) * f) for f in (0.25, 0.5, 0.75, 1.0)]


def _relax_through_stages(atoms: Atoms, group: int, centre: int, beta: int,
                          stages: list[tuple[float, float]]) -> None:
    """Hold the group at each stage's two distances in turn and relax the rest (in place)."""
    for to_centre, to_beta in stages:
        atoms.set_constraint()
        atoms.set_constraint(FixBondLengths([(group, centre), (group, beta)], bondlengths=[to_centre, to_beta],
                                            iterations=500))
        atoms.set_positions(atoms.get_positions())  # SHAKE the pair onto this stage's distances
        LBFGS(atoms, logfile=None, maxstep=0.2).run(fmax=0.05, steps=100)
    atoms.set_constraint()


def _endpoint_reached(mol, numbers: np.ndarray, positions: np.ndarray, candidate: ShiftStep, group: int,
                      accept_smiles: set[str]) -> str:
    """Canonical SMILES of the optimised endpoint: the product, or an accepted other cation; else ValueError."""
    centre, beta = candidate.to_atom, candidate.from_atom
    product_bonds = set(bonds_from_mol(mol))
    product_bonds.discard(tuple(sorted((beta, group))))
    product_bonds.add(tuple(sorted((centre, group))))
    change = compare_bonding(frozenset(product_bonds), numbers, positions, 1)
    if not change.changed:
        return candidate.product_smiles
    reached = None
    if change.relaxed_smiles:
        try:
            reached = carbocation(change.relaxed_smiles, force=True).smiles
        except InputError:
            reached = change.relaxed_smiles
    if reached is not None and reached in accept_smiles:
        return reached
    raise ValueError(f"the product endpoint of the {candidate.kind} shift did not stay "
                     f"{candidate.product_smiles} on optimisation ({change.describe(list(numbers))})")


def shift_barrier(parent: SpeciesResult, candidate: ShiftStep, settings: Settings, *, engine: Engine | None = None,
                  n_images: int = DEFAULT_IMAGES, fmax: float = DEFAULT_FMAX,
                  max_steps: int = DEFAULT_MAX_STEPS, accept_smiles: set[str] = frozenset()) -> Barrier:
    """NEB barrier of one 1,2-shift of a cation that is a minimum (see the module docstring)."""
    start_time = time.perf_counter()
    engine = engine or get_engine(settings.engine, max_iterations=settings.scf_max_iterations)
    calls0 = engine.counters.calls
    if parent.rearranged:
        return Barrier(None, message=f"{parent.smiles} is not a minimum at {parent.level}: no path from it")
    try:
        end_pos, reached = product_endpoint(parent, candidate, settings, engine, accept_smiles)
    except (ValueError, RuntimeError) as exc:  # RuntimeError: ASE's SHAKE or the engine gave up
        return Barrier(None, message=str(exc), runtime_s=time.perf_counter() - start_time,
                       n_gradients=engine.counters.calls - calls0)
    numbers = np.array(parent.numbers)
    kw = dict(charge=1, multiplicity=1, solvent=settings.solvent)
    first = Atoms(numbers=numbers, positions=np.array(parent.positions_angstrom, dtype=float))
    last = Atoms(numbers=numbers, positions=end_pos)
    minimize_rotation_and_translation(first, last)
    images = [first] + [first.copy() for _ in range(max(1, n_images - 2))] + [last]
    for image in images:
        image.calc = EngineCalculator(engine, **kw)
    band = NEB(images, climb=False, method="improvedtangent")
    band.interpolate(method="idpp")
    optimiser = FIRE(band, logfile=None)
    optimiser.run(fmax=max(PRE_CLIMB_FMAX, fmax), steps=max_steps // 3)
    used = optimiser.nsteps
    band.climb = True
    optimiser = FIRE(band, logfile=None)
    converged = bool(optimiser.run(fmax=fmax, steps=max(1, max_steps - used)))
    energies = np.array([image.get_potential_energy() for image in images]) * units.EV_TO_KCAL_MOL
    profile = energies - energies[0]
    top = int(np.argmax(profile[1:-1])) + 1
    reaction = float(profile[-1])
    barrierless = bool(profile[top] <= max(0.0, reaction) + BARRIER_TOLERANCE_KCAL_MOL)
    barrier = max(0.0, reaction) if barrierless else float(profile[top])
    return Barrier(
        barrier_kcal_mol=barrier, barrierless=barrierless, reaction_kcal_mol=reaction,
        ts_xyz=None if barrierless else xyz_text(numbers, images[top].positions,
                                                 f"highest NEB image of {candidate.parent_smiles} -> {reached}, "
                                                 f"dE = {profile[top]:.2f} kcal/mol"),
        image_energies_kcal_mol=[float(e) for e in profile], converged=converged,
        n_gradients=engine.counters.calls - calls0, runtime_s=time.perf_counter() - start_time,
        endpoint_smiles=reached,
        message="" if converged else f"band not converged to {fmax} eV/Å in {max_steps} steps (loose estimate)")


__all__ = ["Barrier", "shift_barrier", "product_endpoint", "xyz_text", "DEFAULT_IMAGES", "DEFAULT_FMAX",
           "DEFAULT_MAX_STEPS"]
