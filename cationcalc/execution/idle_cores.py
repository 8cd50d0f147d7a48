"""The idle cores of one process pool, counted in shared memory and lent to its workers.

The parent adds a core each time a species finishes and leaves a worker with
nothing to do (fewer species than workers remain); a worker's numerical
Hessian borrows from the count and gives back what it took
(:mod:`cationcalc.compute.cores` is the worker's side).  The count is a
``multiprocessing.Value`` created from the pool's own context (spawn), passed
to the workers at their start: no manager process, nothing to clean up.

Example
-------
>>> import multiprocessing
>>> cores = IdleCores(multiprocessing.get_context("spawn"))
>>> cores.freed(); cores.borrow(3), cores.idle
(1, 0)
>>> cores.give_back(1); cores.idle, cores.lent
(1, 1)
"""

from __future__ import annotations

from multiprocessing.context import BaseContext


class IdleCores:
    """A shared count of idle cores: the parent frees them, workers borrow and give back."""

    def __init__(self, context: BaseContext):
        self._count = context.Value("i", 0)
        self._lent = context.Value("i", 0, lock=False)  # guarded by the count's lock

    @property
    def idle(self) -> int:
        """Cores idle now and not lent."""
        with self._count.get_lock():
            return int(self._count.value)

    @property
    def lent(self) -> int:
        """Cores lent so far, all borrowers together (each loan counted once)."""
        with self._count.get_lock():
            return int(self._lent.value)

    def freed(self, count: int = 1) -> None:
        """``count`` workers have nothing left to do (the parent's call)."""
        with self._count.get_lock():
            self._count.value += int(count)

    def borrow(self, wanted: int) -> int:
        """Take up to ``wanted`` idle cores; returns how many were taken."""
        with self._count.get_lock():
            taken = max(0, min(int(wanted), int(self._count.value)))
            self._count.value -= taken
            self._lent.value += taken
        return taken

    def give_back(self, count: int) -> None:
        """Return ``count`` borrowed cores."""
        self.freed(count)
