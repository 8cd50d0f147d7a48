"""Geometry optimisation with ASE on any engine.

:class:`EngineCalculator` adapts an engine to ASE's calculator protocol (it
passes charge, multiplicity and solvent explicitly on every call);
:func:`optimize` runs ASE's LBFGS to a force threshold and reports whether it
converged, the last maximum force and the number of gradients, so a run that
hit the step limit is never used silently.

Optimisers: ASE's LBFGS (the default of ``Settings.optimizer``), BFGS, FIRE,
and PreconLBFGS (LBFGS with an exponential bond-length preconditioner).
GFN2-xTB gradients are cheap, so an optimiser pays only if it saves
gradients without adding per-step overhead: on the 48 species of the
benchmark set (benchmarks/optimizers.py) PreconLBFGS needed 1764 gradients
against 2511 for LBFGS (−30 %), 10.2 s against 12.7 s, and reached the
lowest energy found in 46 of 48 cases (LBFGS 44); FIRE needed 6123 and
missed convergence twice.

Example
-------
>>> import numpy as np
>>> from cationcalc.engines import get_engine
>>> from cationcalc.compute.optimize import optimize
>>> r = optimize([1, 1], np.array([[0, 0, 0], [0, 0, 0.9]]), get_engine(), charge=0, multiplicity=1)
>>> r.converged, round(float(np.linalg.norm(r.positions[1] - r.positions[0])), 2)
(True, 0.78)
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
from numpy.typing import ArrayLike
from ase import Atoms
from ase.calculators.calculator import Calculator, all_changes
from ase.optimize import BFGS, FIRE, LBFGS
from ase.optimize.precon import Exp, PreconLBFGS

from cationcalc.engines.base import Engine, EngineResult


def _precon_lbfgs(atoms, *, maxstep: float, **kwargs):
    """LBFGS preconditioned with an exponential bond-length model (ASE's ``Exp``).

    The preconditioner is a cheap model Hessian built from interatomic
    distances (stiff along bonds, soft along torsions); ``r_NN`` and ``r_cut``
    are fixed for organic molecules (ASE's automatic estimate needs a periodic
    cell).  Armijo line search, as ASE recommends with a preconditioner.
    """
    return PreconLBFGS(atoms, precon=Exp(A=3.0, r_NN=1.1, r_cut=2.0), use_armijo=True, maxstep=maxstep, **kwargs)


OPTIMIZERS = {"LBFGS": LBFGS, "BFGS": BFGS, "FIRE": FIRE, "PreconLBFGS": _precon_lbfgs}


class EngineCalculator(Calculator):
    """ASE calculator in front of a cationcalc engine."""

    implemented_properties = ["energy", "forces", "charges"]

    def __init__(self, engine: Engine, *, charge: int, multiplicity: int, solvent: str | None = None):
        super().__init__()
        self.engine = engine
        self.charge = int(charge)
        self.multiplicity = int(multiplicity)
        self.solvent = solvent
        self.last: EngineResult | None = None

    def calculate(self, atoms: Atoms | None = None, properties: Sequence[str] = ("energy",),
                  system_changes: Sequence[str] = all_changes) -> None:
        super().calculate(atoms, properties, system_changes)
        result = self.engine.compute(self.atoms.numbers, self.atoms.positions, charge=self.charge,
                                     multiplicity=self.multiplicity, solvent=self.solvent)
        self.last = result
        self.results = {"energy": result.energy_ev, "free_energy": result.energy_ev,
                        "forces": result.forces_ev_per_angstrom, "charges": result.charges}


@dataclass(frozen=True)
class OptimizationResult:
    positions: np.ndarray
    energy_ev: float
    max_force_ev_per_angstrom: float
    n_gradients: int
    converged: bool
    charges: np.ndarray
    bond_orders: np.ndarray | None


def optimize(numbers: ArrayLike, positions_angstrom: ArrayLike, engine: Engine, *, charge: int, multiplicity: int,
             solvent: str | None = None, fmax: float = 0.01, max_steps: int = 500,
             max_step_angstrom: float = 0.2, optimizer: str = "LBFGS") -> OptimizationResult:
    """Relax a structure to max |F| < fmax (eV/Å) with an ASE optimiser; writes no files."""
    atoms = Atoms(numbers=list(numbers), positions=np.asarray(positions_angstrom, dtype=float))
    calc = EngineCalculator(engine, charge=charge, multiplicity=multiplicity, solvent=solvent)
    atoms.calc = calc
    before = engine.counters.calls
    if len(atoms) == 1:
        energy = atoms.get_potential_energy()
        return OptimizationResult(atoms.positions.copy(), float(energy), 0.0, engine.counters.calls - before,
                                  True, calc.last.charges, calc.last.bond_orders)
    cls = OPTIMIZERS[optimizer]
    kwargs = {"maxstep": max_step_angstrom} if optimizer in OPTIMIZERS else {}
    opt = cls(atoms, logfile=None, trajectory=None, **kwargs)
    converged = bool(opt.run(fmax=fmax, steps=max_steps))
    forces = atoms.get_forces()
    fmax_now = float(np.sqrt((forces ** 2).sum(axis=1).max()))
    energy = float(atoms.get_potential_energy())
    return OptimizationResult(atoms.positions.copy(), energy, fmax_now, engine.counters.calls - before,
                              converged and fmax_now <= fmax * 1.0001, calc.last.charges, calc.last.bond_orders)
