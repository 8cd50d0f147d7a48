"""The engine protocol: one small interface, many engines behind it.

An engine computes, for one molecular structure, the electronic energy, the
forces, atomic partial charges and Wiberg-type bond orders with one published
method (GFN2-xTB here).  Charge, spin multiplicity and implicit solvent are
explicit arguments of every call, never read from hidden state, because the
engines' own defaults are a known trap (see DEVELOPERS.md).

Units at this boundary: positions in Å, energy in eV, forces in eV/Å (ASE's
units).  Every engine counts its calls and the seconds spent inside the
library, so that a run can say where its time went.

Example
-------
>>> import numpy as np
>>> from cationcalc.engines import get_engine
>>> engine = get_engine("tblite")
>>> water = engine.compute([8, 1, 1], np.array([[0, 0, 0], [0, 0.76, 0.59], [0, -0.76, 0.59]]),
...                        charge=0, multiplicity=1, solvent=None)
>>> round(water.energy_ev, 1)
-138.0
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import Protocol, Sequence

import numpy as np


class EngineError(RuntimeError):
    """The engine could not produce a result (SCF failure, bad input, NaN)."""


class SCFConvergenceError(EngineError):
    """The SCF did not converge even after the retry ladder."""


class UnknownSolventError(EngineError):
    """The solvent name is not parametrised for this engine's solvation model."""


@dataclass(frozen=True)
class EngineResult:
    """One single point: energy (eV), forces (eV/Å), charges (e), bond orders."""

    energy_ev: float
    forces_ev_per_angstrom: np.ndarray
    charges: np.ndarray
    bond_orders: np.ndarray | None = None
    #: how the SCF was converged: "" for the first try, else the retry used
    scf_retry: str = ""


@dataclass
class EngineCounters:
    """Gradient calls and seconds spent inside an engine library."""

    calls: int = 0
    seconds: float = 0.0
    scf_retries: int = 0

    def snapshot(self) -> tuple[int, float]:
        return self.calls, self.seconds


@dataclass
class CallTimer:
    """Counts one engine call and its wall time into the engine's counters (a context manager)."""

    counters: EngineCounters
    start: float = field(default=0.0)

    def __enter__(self):
        self.start = time.perf_counter()
        return self

    def __exit__(self, *exc):
        self.counters.calls += 1
        self.counters.seconds += time.perf_counter() - self.start
        return False


class CachedEngineState:
    """Options and cached library objects shared by the engine implementations.

    The library calculator is kept while the atoms, charge, multiplicity and
    solvent stay the same (``_key``), and the last SCF result seeds the next.
    """

    def __init__(self, max_iterations: int = 250, electronic_temperature_k: float = 300.0,
                 accuracy: float = 1.0):
        self.max_iterations = int(max_iterations)
        self.electronic_temperature_k = float(electronic_temperature_k)
        self.accuracy = float(accuracy)
        self.counters = EngineCounters()
        self.reset()

    def reset(self) -> None:
        """Drop the cached calculator and SCF restart: the next call starts from scratch."""
        self._key = None
        self._calc = None
        self._restart = None


class Engine(Protocol):
    """What every engine offers.  Implementations live in this package only."""

    #: short engine name used on the command line ("tblite", "xtb")
    name: str
    #: the published method computed ("GFN2-xTB")
    method: str
    #: implicit solvent model used when a solvent is named ("ALPB", "GBSA")
    solvent_model: str
    counters: EngineCounters

    def compute(
        self,
        numbers: Sequence[int],
        positions_angstrom: np.ndarray,
        *,
        charge: int,
        multiplicity: int,
        solvent: str | None,
    ) -> EngineResult:
        """Energy, forces, charges and bond orders for one structure."""
        ...

    def solvents(self) -> tuple[str, ...]:
        """The solvent names this engine's solvation model accepts."""
        ...


def check_finite(result: EngineResult, what: str) -> EngineResult:
    """Refuse NaN or infinite energies/forces instead of passing them on."""
    if not np.isfinite(result.energy_ev) or not np.all(np.isfinite(result.forces_ev_per_angstrom)):
        raise EngineError(f"{what}: the engine returned a non-finite energy or force (NaN/inf)")
    return result
