"""cationcalc: carbocation stability from GFN2-xTB on a laptop CPU.

Hydride-ion affinities, heterolysis energies and thermochemistry of
carbocations and their precursors, each number computed (not looked up) and
checked against published experiment.  The figures are screening estimates,
not safety data.

Thread counts of the numerical libraries are pinned to one per process before
any engine is imported (parallelism is over molecules, one process per core),
and oneMKL's code path to one per CPU (``MKL_CBWR=AUTO``: the same numbers in
every process); a user who sets these variables themselves keeps their value.

One function per task (:mod:`cationcalc.api`) is reachable from here and loaded
on first use, so ``import cationcalc.chem.units`` stays cheap:

>>> import cationcalc
>>> cationcalc.hia.__module__
'cationcalc.api'
"""

from __future__ import annotations

import os as _os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    _os.environ.setdefault(_var, "1")
_os.environ.setdefault("OMP_STACKSIZE", "256M")
# oneMKL, when installed, picks its code path by memory alignment unless told otherwise, so the same species gave
# last-digit differences in a pool worker and in this process; AUTO keeps one path per CPU (bitwise-equal runs)
_os.environ.setdefault("MKL_CBWR", "AUTO")

from cationcalc.about import SAFETY_NOTE, __version__  # noqa: E402  (after the thread pins)

#: names served by cationcalc.api, imported the first time one of them is used
_API = ("Records", "hia", "heterolysis", "thermo", "ionize", "sites", "ladder", "shifts", "rate")

__all__ = ["SAFETY_NOTE", "__version__", *_API]


def __getattr__(name: str) -> object:
    if name in _API:
        from cationcalc import api

        return getattr(api, name)
    raise AttributeError(f"module 'cationcalc' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_API))
