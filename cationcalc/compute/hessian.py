"""Numerical Hessians from analytic engine gradients, in memory, on idle cores when there are some.

Central differences (the default): every Cartesian coordinate is displaced
by ±h (default 0.005 Å) and the Hessian column is −(F(+h) − F(−h)) / 2h,
6N gradients.  Forward differences (``scheme="forward"``) take
−(F(+h) − F(0)) / h, 3N + 1 gradients, with an error of order h (the third
derivative) where the central one is of order h²; the matrix is then
symmetrised, (H + Hᵀ)/2.  Nothing is written to disk (no stale displacement
files can be reused).

Each displaced SCF starts from the previous wavefunction, in a chain.  The
columns are cut into a fixed number of contiguous blocks (:func:`column_blocks`,
set by the molecule's size alone): the first block continues the engine's
chain, every other block starts a chain of its own on a fresh copy of the
engine.  Which thread computes a block then does not change a digit, so
the Hessian is the same whether the blocks ran one after another or, with
cores borrowed from the executor (:mod:`cationcalc.compute.cores`), in
threads (tblite releases the GIL while it computes).  Every gradient is
counted in the engine's counters, the helpers' too (their seconds add up,
so engine seconds may exceed the wall time of a Hessian run in threads).

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

import copy
import threading
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike

from cationcalc.compute.cores import borrow_cores, give_back_cores
from cationcalc.engines.base import Engine, EngineCounters

DEFAULT_STEP_ANGSTROM = 0.005
#: finite-difference schemes: displacements per coordinate
SCHEMES = {"central": (+1.0, -1.0), "forward": (+1.0,)}
#: a block holds at least this many columns (a fresh chain costs about one extra gradient)
MIN_BLOCK_COLUMNS = 24
#: at most this many blocks, hence at most this many threads on one Hessian
MAX_BLOCKS = 4
#: engines measured safe to run in several threads at once, each on its own instance
THREAD_SAFE_ENGINES = frozenset({"tblite"})


def column_blocks(n_columns: int) -> list[range]:
    """Contiguous blocks of Hessian columns: 1, 2 or 4 of them, each ≥ MIN_BLOCK_COLUMNS (one if fewer).

    >>> [len(b) for b in column_blocks(39)], [len(b) for b in column_blocks(48)]
    ([39], [24, 24])
    >>> [(b.start, b.stop) for b in column_blocks(138)]
    [(0, 35), (35, 70), (70, 104), (104, 138)]
    """
    count = 1
    while count * 2 <= MAX_BLOCKS and n_columns // (count * 2) >= MIN_BLOCK_COLUMNS:
        count *= 2
    size, extra = divmod(n_columns, count)
    edges = np.cumsum([0] + [size + (i < extra) for i in range(count)])
    return [range(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:])]


@dataclass
class _Displacements:
    """What every block needs: the structure, the step, the engine keywords and the column matrix."""

    numbers: ArrayLike
    pos0: np.ndarray
    step: float
    keywords: dict
    #: forces at the undisplaced structure (forward differences), flattened
    forces0: np.ndarray | None = None
    columns: np.ndarray = field(init=False)

    def __post_init__(self) -> None:
        self.columns = np.zeros((self.pos0.size, self.pos0.size))

    def compute(self, engine: Engine, block: range) -> None:
        """Fill the columns of ``block`` with ``engine`` (one SCF chain)."""
        signs = SCHEMES["central"] if self.forces0 is None else SCHEMES["forward"]
        for k in block:
            atom, axis = divmod(k, 3)
            forces = []
            for sign in signs:
                pos = self.pos0.copy()
                pos[atom, axis] += sign * self.step
                result = engine.compute(self.numbers, pos, **self.keywords)
                forces.append(result.forces_ev_per_angstrom.reshape(-1))
            if self.forces0 is None:
                self.columns[:, k] = -(forces[0] - forces[1]) / (2.0 * self.step)
            else:
                self.columns[:, k] = -(forces[0] - self.forces0) / self.step


def numerical_hessian(numbers: ArrayLike, positions_angstrom: ArrayLike, engine: Engine, *, charge: int, multiplicity: int,
                      solvent: str | None = None, step_angstrom: float = DEFAULT_STEP_ANGSTROM,
                      scheme: str = "central") -> np.ndarray:
    """Symmetrised finite-difference Hessian in eV/Å² (3N × 3N), ``scheme`` 'central' or 'forward'."""
    if scheme not in SCHEMES:
        raise ValueError(f"Hessian scheme {scheme!r}: choose one of {', '.join(SCHEMES)}")
    pos0 = np.asarray(positions_angstrom, dtype=float)
    keywords = {"charge": charge, "multiplicity": multiplicity, "solvent": solvent}
    forces0 = None
    if scheme == "forward":
        forces0 = engine.compute(numbers, pos0, **keywords).forces_ev_per_angstrom.reshape(-1)
    job = _Displacements(numbers, pos0, float(step_angstrom), keywords, forces0)
    blocks = column_blocks(pos0.size)
    if len(blocks) == 1 or not hasattr(engine, "reset"):
        job.compute(engine, range(pos0.size))
    else:
        _BlockRun(job, engine, blocks).run()
    hessian = job.columns
    return 0.5 * (hessian + hessian.T)


def _fresh_copy(engine: Engine) -> Engine:
    """An engine with the same options, no cached SCF and counters of its own (for one block)."""
    twin = copy.copy(engine)
    twin.counters = EngineCounters()
    twin.reset()
    return twin


class _BlockRun:
    """Blocks 1… on fresh engine copies, by the calling thread and by helper threads on borrowed cores.

    The calling thread computes block 0 with ``engine`` and then takes further
    blocks; before each block it borrows idle cores for the blocks nobody has
    taken yet, one helper thread per core, which gives its core back when no
    block is left.  The copies' counters are added to ``engine.counters`` at
    the end (in the calling thread); the first error of any thread is raised.
    """

    def __init__(self, job: _Displacements, engine: Engine, blocks: list[range]):
        self.job, self.engine = job, engine
        self.copies = {i: _fresh_copy(engine) for i in range(1, len(blocks))}
        self.pending = list(range(1, len(blocks)))
        self.blocks = blocks
        self.lock = threading.Lock()
        self.errors: list[BaseException] = []
        self.helpers: list[threading.Thread] = []
        self.threads_ok = getattr(engine, "name", None) in THREAD_SAFE_ENGINES

    def run(self) -> None:
        try:
            self._recruit(taking=0)
            self.job.compute(self.engine, self.blocks[0])
            while True:
                self._recruit(taking=1)
                if not self._compute_next():
                    break
        except BaseException as exc:
            self._fail(exc)
        finally:
            for thread in self.helpers:
                thread.join()
            self._merge_counters()
        if self.errors:
            raise self.errors[0]

    def _recruit(self, taking: int) -> None:
        """Borrow idle cores for pending blocks that neither this thread (``taking``) nor a helper takes next."""
        if not self.threads_ok:
            return
        with self.lock:
            alive = sum(thread.is_alive() for thread in self.helpers)
            wanted = len(self.pending) - taking - alive
        lent = borrow_cores(wanted)
        for started in range(lent):
            thread = threading.Thread(target=self._helper, name="cationcalc-hessian-helper", daemon=True)
            try:
                thread.start()
            except RuntimeError:  # no thread to be had: the cores not used go back
                give_back_cores(lent - started)
                return
            self.helpers.append(thread)

    def _helper(self) -> None:
        try:
            while self._compute_next():
                pass
        except BaseException as exc:
            self._fail(exc)
        finally:
            give_back_cores(1)

    def _compute_next(self) -> bool:
        """Compute the next pending block on its own engine copy; False when none is left (or one failed)."""
        with self.lock:
            if not self.pending or self.errors:
                return False
            index = self.pending.pop(0)
        twin = self.copies[index]
        try:
            self.job.compute(twin, self.blocks[index])
        finally:
            twin.reset()  # drop the library objects now, while the engine library is loaded
        return True

    def _fail(self, exc: BaseException) -> None:
        with self.lock:
            self.errors.append(exc)

    def _merge_counters(self) -> None:
        total = self.engine.counters
        for twin in self.copies.values():
            total.calls += twin.counters.calls
            total.seconds += twin.counters.seconds
            total.scf_retries += twin.counters.scf_retries
