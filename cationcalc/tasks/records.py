"""Building blocks of task records: a prepared input and the keys every record shares.

A task validates each input into one or more :class:`Prepared` objects (the
species it needs and a ``finish`` function that turns their results into one
flat record).  The runner in :mod:`cationcalc.tasks.runner` computes the union of all
needed species once and calls ``finish``.

Example
-------
>>> from cationcalc.tasks.records import Prepared, record_base
>>> from cationcalc.compute.models import Settings
>>> Prepared(record_base("C[C+](C)C", "tBu", Settings()), error="demo").base["level"]
'GFN2-xTB (gas)'
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

from cationcalc.compute.models import Settings, SpeciesResult
from cationcalc.chem.species import Species


@dataclass
class Prepared:
    """A validated input: the species it needs and how to build its record."""

    base: dict
    needs: dict[str, Species] = field(default_factory=dict)
    error: str | None = None
    finish: Callable[[dict[str, SpeciesResult]], dict] | None = None


class BatchInterrupted(Exception):
    """Ctrl-C during a task; ``records`` has every input (unfinished ones carry an error)."""

    def __init__(self, records: list[dict]):
        super().__init__("interrupted")
        self.records = records


def record_base(text: str, name: str, settings: Settings) -> dict:
    return {"input": text, "name": name, "method": settings.method, "engine": settings.engine,
            "solvent": settings.solvent or "none", "solvent_model": settings.solvent_model or "none",
            "level": settings.level, "temperature_k": settings.temperature_k}


def collect_warnings(results: dict[str, SpeciesResult]) -> list[str]:
    seen: list[str] = []
    for r in results.values():
        for w in r.warnings:
            if w not in seen:
                seen.append(w)
    return seen


def species_profile(results: dict[str, SpeciesResult]) -> dict:
    grads: dict[str, int] = {}
    for r in results.values():
        for k, v in r.profile.gradients.items():
            grads[k] = grads.get(k, 0) + v
    return {"wall_s": round(sum(r.profile.wall_s for r in results.values()), 3),
            "engine_s": round(sum(r.profile.engine_s for r in results.values()), 3), "gradients": grads}



__all__ = ["Prepared", "record_base", "collect_warnings", "species_profile", "BatchInterrupted"]
