"""Engines: GFN2-xTB from tblite (default) or xtb-python, behind one protocol.

Nothing outside this package imports an engine library.

Example
-------
>>> from cationcalc.engines import get_engine, ENGINE_NAMES
>>> get_engine("tblite").method
'GFN2-xTB'
>>> ENGINE_NAMES
('tblite', 'xtb')
"""

from __future__ import annotations

from typing import Any

from cationcalc.engines.base import Engine, EngineError, EngineResult, SCFConvergenceError, UnknownSolventError
from cationcalc.engines.solvents import normalise_solvent

ENGINE_NAMES = ("tblite", "xtb")


def get_engine(name: str = "tblite", **options: Any) -> Engine:
    """A fresh engine by name ('tblite' or 'xtb')."""
    key = str(name).lower()
    if key == "tblite":
        from cationcalc.engines.tblite_engine import TBLiteEngine

        return TBLiteEngine(**options)
    if key in ("xtb", "xtb-python"):
        from cationcalc.engines.xtb_engine import XTBEngine

        return XTBEngine(**options)
    raise ValueError(f"unknown engine {name!r}: choose one of {', '.join(ENGINE_NAMES)}")


__all__ = ["Engine", "EngineError", "EngineResult", "SCFConvergenceError", "UnknownSolventError",
           "get_engine", "normalise_solvent", "ENGINE_NAMES"]
