"""GFN2-xTB through tblite's low-level API (the default engine).

The calculator object is kept and updated with new positions while the atoms,
charge, multiplicity and solvent stay the same, and each SCF restarts from
the previous wavefunction.  An SCF that fails walks a retry ladder (more
iterations with a damped mixer; then a hot electronic temperature of 1000 K
and 3000 K whose result seeds a re-converged 300 K SCF).  Only 300 K energies
are ever returned: energies at different electronic temperatures are not
comparable.

Example
-------
>>> import numpy as np
>>> from cationcalc.engines.tblite_engine import TBLiteEngine
>>> e = TBLiteEngine()
>>> r = e.compute([1, 1], np.array([[0, 0, 0], [0, 0, 0.74]]), charge=0, multiplicity=1, solvent=None)
>>> r.energy_ev < 0
True
"""

from __future__ import annotations

import atexit
import weakref
from typing import Sequence

import numpy as np

from cationcalc.chem import units
from cationcalc.engines.blas import prepare_blas
from cationcalc.engines.base import (
    CachedEngineState,
    EngineError,
    EngineResult,
    SCFConvergenceError,
    UnknownSolventError,
    CallTimer,
    check_finite,
)
from cationcalc.engines.solvents import ALPB_NAMES, GBSA_NAMES

_KELVIN_TO_HARTREE = units.BOLTZMANN_J_K / (units.HARTREE_EV * units.EV_TO_J_MOL / units.AVOGADRO)


#: engines alive in this process; their library objects are freed at exit while tblite is still loaded
_LIVE: "weakref.WeakSet[TBLiteEngine]" = weakref.WeakSet()


@atexit.register
def _release_library_objects() -> None:
    # without this, a cached engine outliving the tblite module at interpreter shutdown makes
    # its ffi.gc callbacks print "Exception ignored ... 'NoneType' object has no attribute"
    for engine in list(_LIVE):
        engine.reset()


class TBLiteEngine(CachedEngineState):
    """GFN2-xTB from tblite; ALPB (default) or GBSA implicit solvent."""

    name = "tblite"
    method = "GFN2-xTB"

    def __init__(self, solvent_model: str = "ALPB", max_iterations: int = 250,
                 electronic_temperature_k: float = 300.0, accuracy: float = 1.0):
        if solvent_model not in ("ALPB", "GBSA"):
            raise ValueError(f"solvent model {solvent_model!r}: tblite engine offers ALPB or GBSA")
        self.solvent_model = solvent_model
        prepare_blas()  # before tblite is imported: its BLAS/LAPACK symbols bind to MKL when installed
        super().__init__(max_iterations, electronic_temperature_k, accuracy)
        _LIVE.add(self)

    def solvents(self) -> tuple[str, ...]:
        return tuple(sorted(ALPB_NAMES if self.solvent_model == "ALPB" else GBSA_NAMES))

    def _solvent_name(self, solvent: str | None) -> str | None:
        if solvent is None:
            return None
        table = ALPB_NAMES if self.solvent_model == "ALPB" else GBSA_NAMES
        if solvent not in table:
            raise UnknownSolventError(
                f"solvent {solvent!r} has no {self.solvent_model} parameters; choose one of: "
                + ", ".join(sorted(table))
            )
        return table[solvent]

    def _new_calculator(self, numbers, positions_bohr, charge, multiplicity, solvent_name):
        from tblite.interface import Calculator

        calc = Calculator(self.method, np.asarray(numbers, dtype=int), positions_bohr,
                          charge=float(charge), uhf=int(multiplicity) - 1)
        calc.set("verbosity", 0)
        calc.set("accuracy", self.accuracy)
        if solvent_name is not None:
            calc.add(f"{self.solvent_model.lower()}-solvation", solvent_name)
        return calc

    def _configure(self, calc, max_iterations, damping, temperature_k):
        calc.set("max-iter", int(max_iterations))
        calc.set("mixer-damping", float(damping))
        calc.set("temperature", float(temperature_k) * _KELVIN_TO_HARTREE)

    def compute(self, numbers: Sequence[int], positions_angstrom: np.ndarray, *, charge: int,
                multiplicity: int, solvent: str | None) -> EngineResult:
        solvent_name = self._solvent_name(solvent)
        numbers = tuple(int(z) for z in numbers)
        positions_bohr = np.asarray(positions_angstrom, dtype=float) / units.BOHR_ANGSTROM
        key = (numbers, int(charge), int(multiplicity), solvent_name)
        with CallTimer(self.counters):
            if key != self._key or self._calc is None:
                self._calc = self._new_calculator(numbers, positions_bohr, charge, multiplicity, solvent_name)
                self._key = key
                self._restart = None
            else:
                self._calc.update(positions=positions_bohr)
            res, retry = self._converge()
        energy_ev = float(res.get("energy")) * units.HARTREE_EV
        forces = -np.asarray(res.get("gradient"), dtype=float) * units.HARTREE_EV / units.BOHR_ANGSTROM
        charges = np.asarray(res.get("charges"), dtype=float).copy()
        try:
            bond_orders = np.asarray(res.get("bond-orders"), dtype=float)
            if bond_orders.ndim == 3:  # open shell: spin dimension, Fortran order
                n = len(numbers)
                bond_orders = bond_orders.reshape((n, n, -1), order="F").sum(axis=2)
            bond_orders = bond_orders.copy()
        except Exception:
            bond_orders = None
        return check_finite(EngineResult(energy_ev, forces, charges, bond_orders, retry), "tblite GFN2-xTB")

    def _converge(self):
        from tblite.exceptions import TBLiteRuntimeError

        calc = self._calc
        base_t = self.electronic_temperature_k
        ladder = [
            ("", self.max_iterations, 0.4, base_t, self._restart),
            ("more iterations, damped mixer", 4 * self.max_iterations, 0.2, base_t, None),
        ]
        last_error = None
        for label, iters, damping, temp, guess in ladder:
            try:
                self._configure(calc, iters, damping, temp)
                res = calc.singlepoint(guess, copy=guess is not None)
                self._restart = res
                if label:
                    self.counters.scf_retries += 1
                return res, label
            except (TBLiteRuntimeError, RuntimeError) as exc:
                last_error = exc
        for hot in (1000.0, 3000.0):
            try:
                self._configure(calc, 4 * self.max_iterations, 0.2, hot)
                hot_res = calc.singlepoint(None)
                self._configure(calc, 4 * self.max_iterations, 0.2, base_t)
                res = calc.singlepoint(hot_res, copy=True)
                self._restart = res
                self.counters.scf_retries += 1
                return res, f"converged at {hot:.0f} K, then re-converged at {base_t:.0f} K"
            except (TBLiteRuntimeError, RuntimeError) as exc:
                last_error = exc
        self.reset()
        raise SCFConvergenceError(
            f"GFN2-xTB SCF did not converge after the retry ladder (max {4 * self.max_iterations} "
            f"iterations, damped mixer, hot electronic temperatures): {last_error}"
        )


__all__ = ["TBLiteEngine", "EngineError"]
