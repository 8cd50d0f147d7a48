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
missed convergence twice.  Measured again with the output caught (below):
1766 against 2516 gradients, 48/48 converged, final energies of the two
within 0.05 kcal/mol for 44 of 48 species (median 0.0015 kcal/mol; the
largest, 0.15 kcal/mol, a different rotamer).

Nothing the optimiser libraries say reaches the terminal: ASE's Armijo line
search logs "Passed direction which is not downhill" and warns "Armijo
linesearch failed, resetting Hessian" (to standard error), and anything
printed to standard output is caught too, so ``--json`` output stays clean.
What was said is kept, counted, in :attr:`OptimizationResult.notes`.  When
the line search gives up even after resetting its Hessian (ASE raises), the
optimisation goes on from where it stopped with LBFGS for the remaining steps,
and a note says so; an engine error behind the failure is raised as itself.

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

import contextlib
import io
import logging
import re
import warnings
from dataclasses import dataclass
from typing import Iterator, Sequence

import numpy as np
from numpy.typing import ArrayLike
from ase import Atoms
from ase.calculators.calculator import Calculator, all_changes
from ase.optimize import BFGS, FIRE, LBFGS
from ase.optimize.precon import Exp, PreconLBFGS

from cationcalc.engines.base import Engine, EngineError, EngineResult


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
        #: the engine error of the last call, None when it succeeded (ASE's line search swallows errors)
        self.last_error: EngineError | None = None

    def calculate(self, atoms: Atoms | None = None, properties: Sequence[str] = ("energy",),
                  system_changes: Sequence[str] = all_changes) -> None:
        super().calculate(atoms, properties, system_changes)
        self.last_error = None
        try:
            result = self.engine.compute(self.atoms.numbers, self.atoms.positions, charge=self.charge,
                                         multiplicity=self.multiplicity, solvent=self.solvent)
        except EngineError as exc:
            self.last_error = exc
            raise
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
    #: what the optimiser library said (warnings, log messages, printed lines), each once with its count
    notes: tuple[str, ...] = ()


class _LibraryMessages:
    """Collects what ASE logs, warns and prints during an optimisation, instead of showing it."""

    def __init__(self) -> None:
        self.counts: dict[str, int] = {}
        self.stdout = io.StringIO()

    def add(self, text: str) -> None:
        text = " ".join(str(text).split())
        if text:
            self.counts[text] = self.counts.get(text, 0) + 1

    def notes(self) -> tuple[str, ...]:
        for line in self.stdout.getvalue().splitlines():
            self.add(line)
        self.stdout = io.StringIO()
        return tuple(text if n == 1 else f"{text} ({n}×)" for text, n in self.counts.items())

    @contextlib.contextmanager
    def caught(self) -> Iterator[None]:
        """Inside: ASE's log records (warning and above), warnings and standard output land here."""
        messages = self

        class Collect(logging.Handler):
            def emit(self, record: logging.LogRecord) -> None:
                # the template without its numbers, so that repeats count as one note
                messages.add(re.sub(r":?\s*%[-+#0-9.]*[a-zA-Z]", "", str(record.msg)))

        logger = logging.getLogger("ase")
        handler, propagate = Collect(logging.WARNING), logger.propagate
        logger.addHandler(handler)
        logger.propagate = False
        try:
            with warnings.catch_warnings(record=True) as caught, contextlib.redirect_stdout(self.stdout):
                warnings.simplefilter("always")
                try:
                    yield
                finally:
                    for w in caught:
                        self.add(str(w.message))
        finally:
            logger.removeHandler(handler)
            logger.propagate = propagate


def _line_search_gave_up(exc: RuntimeError) -> bool:
    return not isinstance(exc, EngineError) and str(exc).startswith("Armijo linesearch failed")


def _run(atoms: Atoms, calc: EngineCalculator, optimizer: str, fmax: float, max_steps: int,
         max_step_angstrom: float, messages: _LibraryMessages) -> bool:
    """Run the optimiser; a PreconLBFGS line search that gives up is continued by LBFGS."""
    cls = OPTIMIZERS[optimizer]
    opt = cls(atoms, logfile=None, trajectory=None, maxstep=max_step_angstrom)
    with messages.caught():
        try:
            return bool(opt.run(fmax=fmax, steps=max_steps))
        except RuntimeError as exc:
            if not _line_search_gave_up(exc):
                raise
            if calc.last_error is not None:  # the line search hid an engine failure
                raise calc.last_error from None
            messages.add(f"{optimizer} line search gave up after {opt.nsteps} steps ({exc}); continued with LBFGS")
            rest = LBFGS(atoms, logfile=None, trajectory=None, maxstep=max_step_angstrom)
            return bool(rest.run(fmax=fmax, steps=max(0, max_steps - opt.nsteps)))


def optimize(numbers: ArrayLike, positions_angstrom: ArrayLike, engine: Engine, *, charge: int, multiplicity: int,
             solvent: str | None = None, fmax: float = 0.01, max_steps: int = 500,
             max_step_angstrom: float = 0.2, optimizer: str = "LBFGS") -> OptimizationResult:
    """Relax a structure to max |F| < fmax (eV/Å) with an ASE optimiser; writes and prints nothing."""
    atoms = Atoms(numbers=list(numbers), positions=np.asarray(positions_angstrom, dtype=float))
    calc = EngineCalculator(engine, charge=charge, multiplicity=multiplicity, solvent=solvent)
    atoms.calc = calc
    before = engine.counters.calls
    if len(atoms) == 1:
        energy = atoms.get_potential_energy()
        return OptimizationResult(atoms.positions.copy(), float(energy), 0.0, engine.counters.calls - before,
                                  True, calc.last.charges, calc.last.bond_orders)
    if optimizer not in OPTIMIZERS:
        raise ValueError(f"unknown optimizer {optimizer!r}: choose one of {', '.join(OPTIMIZERS)}")
    messages = _LibraryMessages()
    converged = _run(atoms, calc, optimizer, fmax, max_steps, max_step_angstrom, messages)
    forces = atoms.get_forces()
    fmax_now = float(np.sqrt((forces ** 2).sum(axis=1).max()))
    energy = float(atoms.get_potential_energy())
    return OptimizationResult(atoms.positions.copy(), energy, fmax_now, engine.counters.calls - before,
                              converged and fmax_now <= fmax * 1.0001, calc.last.charges, calc.last.bond_orders,
                              messages.notes())
