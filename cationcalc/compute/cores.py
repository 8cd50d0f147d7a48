"""Idle cores a computation may borrow: a small handle that the executor installs.

A process that computes one species is single-threaded.  When the executor
has cores with nothing left to do (fewer species than workers remain), it
installs a :class:`CoreLender` in each worker process; a step that can use
threads (the numerical Hessian) borrows some of those cores just before it
starts and gives them back when it ends, so the busy threads never outnumber
the cores.  Nothing is installed in a serial run or on Dask: :func:`borrow_cores`
then lends nothing and the computation runs as a single thread.

The protocol lives here so that ``compute/`` never imports ``execution/``.

Example
-------
>>> from cationcalc.compute.cores import borrow_cores
>>> borrow_cores(3)  # nothing installed: a serial run lends no core
0
"""

from __future__ import annotations

from typing import Optional, Protocol


class CoreLender(Protocol):
    """Lends idle cores of this machine (shared by the worker processes of one executor)."""

    def borrow(self, wanted: int) -> int:
        """Take up to ``wanted`` idle cores; returns how many were taken (0 when none are idle)."""
        ...

    def give_back(self, count: int) -> None:
        """Return ``count`` cores taken with :meth:`borrow`."""
        ...


_LENDER: Optional[CoreLender] = None


def install_lender(lender: Optional[CoreLender]) -> None:
    """Set (or with None remove) this process's lender of idle cores."""
    global _LENDER
    _LENDER = lender


def installed_lender() -> Optional[CoreLender]:
    """This process's lender of idle cores, or None."""
    return _LENDER


def borrow_cores(wanted: int) -> int:
    """Take up to ``wanted`` idle cores from this process's lender; 0 when none is installed or idle."""
    lender = _LENDER
    return lender.borrow(int(wanted)) if lender is not None and wanted > 0 else 0


def give_back_cores(count: int) -> None:
    """Return ``count`` cores taken with :func:`borrow_cores` (from any thread)."""
    lender = _LENDER
    if lender is not None and count > 0:
        lender.give_back(int(count))
