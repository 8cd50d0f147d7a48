"""GFN2-xTB through xtb-python's low-level API (the second engine).

Charge and unpaired electrons go to the library's constructor directly (its
ASE calculator silently ignores a ``charge=`` keyword).  Only GBSA solvation
exists here, and the library silently runs an unknown solvent in the gas
phase, so names are validated before they reach it.

Example
-------
>>> import numpy as np
>>> from cationcalc.engines.xtb_engine import XTBEngine   # needs the 'xtb' extra
>>> r = XTBEngine().compute([1, 1], np.array([[0, 0, 0], [0, 0, 0.74]]), charge=0,
...                         multiplicity=1, solvent=None)
>>> r.energy_ev < 0
True
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from cationcalc.chem import units
from cationcalc.engines.base import CachedEngineState, EngineResult, SCFConvergenceError, UnknownSolventError, CallTimer, check_finite
from cationcalc.engines.solvents import GBSA_NAMES


class XTBEngine(CachedEngineState):
    """GFN2-xTB from xtb-python (PyPI package ``xtb``); GBSA implicit solvent."""

    name = "xtb"
    method = "GFN2-xTB"
    solvent_model = "GBSA"

    def __init__(self, max_iterations: int = 250, electronic_temperature_k: float = 300.0,
                 accuracy: float = 1.0):
        try:
            import xtb.interface  # noqa: F401
        except ImportError as exc:  # pragma: no cover - depends on the install
            raise ImportError(
                "engine 'xtb' needs xtb-python: pip install 'cationcalc[xtb]' (wheels exist up to Python 3.11)"
            ) from exc
        super().__init__(max_iterations, electronic_temperature_k, accuracy)

    def solvents(self) -> tuple[str, ...]:
        return tuple(sorted(GBSA_NAMES))

    def compute(self, numbers: Sequence[int], positions_angstrom: np.ndarray, *, charge: int,
                multiplicity: int, solvent: str | None) -> EngineResult:
        from xtb.interface import Calculator, XTBException
        from xtb.libxtb import VERBOSITY_MUTED
        from xtb.utils import get_method, get_solvent

        if solvent is not None and solvent not in GBSA_NAMES:
            raise UnknownSolventError(
                f"solvent {solvent!r} has no GBSA parameters in xtb-python; choose one of: "
                + ", ".join(sorted(GBSA_NAMES))
            )
        numbers = tuple(int(z) for z in numbers)
        positions_bohr = np.asarray(positions_angstrom, dtype=float) / units.BOHR_ANGSTROM
        key = (numbers, int(charge), int(multiplicity), solvent)
        with CallTimer(self.counters):
            if key != self._key or self._calc is None:
                calc = Calculator(get_method(self.method), np.array(numbers), positions_bohr,
                                  charge=float(charge), uhf=int(multiplicity) - 1)
                calc.set_verbosity(VERBOSITY_MUTED)
                calc.set_accuracy(self.accuracy)
                calc.set_electronic_temperature(self.electronic_temperature_k)
                if solvent is not None:
                    calc.set_solvent(get_solvent(GBSA_NAMES[solvent]))
                self._calc, self._key, self._restart = calc, key, None
            else:
                self._calc.update(positions_bohr)
            res = None
            retry = ""
            for label, iters in (("", self.max_iterations), ("more iterations", 4 * self.max_iterations)):
                try:
                    self._calc.set_max_iterations(iters)
                    res = self._calc.singlepoint(self._restart if not label else None)
                    retry = label
                    break
                except XTBException as exc:
                    last = exc
            if res is None:
                self.reset()
                raise SCFConvergenceError(f"GFN2-xTB (xtb-python) SCF did not converge: {last}")
            self._restart = res
        if retry:
            self.counters.scf_retries += 1
        energy_ev = float(res.get_energy()) * units.HARTREE_EV
        forces = -np.asarray(res.get_gradient(), dtype=float) * units.HARTREE_EV / units.BOHR_ANGSTROM
        charges = np.asarray(res.get_charges(), dtype=float).copy()
        try:
            bond_orders = np.asarray(res.get_bond_orders(), dtype=float).copy()
        except Exception:
            bond_orders = None
        return check_finite(EngineResult(energy_ev, forces, charges, bond_orders, retry), "xtb-python GFN2-xTB")
