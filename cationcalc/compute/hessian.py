"""Numerical Hessians from analytic engine gradients, in memory.

Central differences: every Cartesian coordinate is displaced by ±h (default
0.005 Å) and the Hessian column is −(F(+h) − F(−h)) / 2h; the matrix is then
symmetrised, (H + Hᵀ)/2.  Nothing is written to disk (no stale displacement
files can be reused).  Each displaced SCF starts from the previous
wavefunction, which the engines keep.

Example
-------
>>> import numpy as np
>>> from cationcalc.engines import get_engine
>>> from cationcalc.compute.hessian import numerical_hessian
>>> h = numerical_hessian([1, 1], np.array([[0, 0, 0], [0, 0, 0.765]]), get_engine(), charge=0, multiplicity=1)
>>> h.shape, bool(np.allclose(h, h.T))
((6, 6), True)
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from cationcalc.engines.base import Engine

DEFAULT_STEP_ANGSTROM = 0.005


def numerical_hessian(numbers: ArrayLike, positions_angstrom: ArrayLike, engine: Engine, *, charge: int, multiplicity: int,
                      solvent: str | None = None, step_angstrom: float = DEFAULT_STEP_ANGSTROM) -> np.ndarray:
    """Symmetrised central-difference Hessian in eV/Å² (3N × 3N)."""
    pos0 = np.asarray(positions_angstrom, dtype=float)
    n = len(pos0)
    hessian = np.zeros((3 * n, 3 * n))
    for k in range(3 * n):
        atom, axis = divmod(k, 3)
        forces = []
        for sign in (+1.0, -1.0):
            pos = pos0.copy()
            pos[atom, axis] += sign * step_angstrom
            result = engine.compute(numbers, pos, charge=charge, multiplicity=multiplicity, solvent=solvent)
            forces.append(result.forces_ev_per_angstrom.reshape(-1))
        hessian[:, k] = -(forces[0] - forces[1]) / (2.0 * step_angstrom)
    return 0.5 * (hessian + hessian.T)
