"""Run many species: serially or on a process pool, one worker per core.

Species are independent, so parallelism is over species.  Each worker
process pins its numerical libraries to one thread (set in the package
``__init__`` before any engine is imported) and keeps one engine per
settings for all its species.  A species that fails becomes a
:class:`SpeciesFailure` carrying a one-line message; the others go on.

Example
-------
>>> from cationcalc.executors import compute_many
>>> from cationcalc.models import Settings
>>> from cationcalc.species import species
>>> results = compute_many([species("O")], Settings(), workers=1)
>>> results[species("O")].point_group
'C2v'
"""

from __future__ import annotations

import multiprocessing
import os
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass
from typing import Callable, Iterable

from .engines import get_engine
from .engines.base import EngineError
from .models import Settings, SpeciesResult
from .pipeline import ComputationError, compute_species
from .species import InputError, Species


@dataclass(frozen=True)
class SpeciesFailure:
    """Why a species has no result (one line)."""

    message: str


class Interrupted(Exception):
    """Ctrl-C during a batch; ``results`` holds every species that finished (others are failures)."""

    def __init__(self, results: dict):
        super().__init__("interrupted")
        self.results = results


_ENGINES: dict = {}


def _engine_for(settings: Settings):
    key = (settings.engine, settings.scf_max_iterations)
    if key not in _ENGINES:
        _ENGINES[key] = get_engine(settings.engine, max_iterations=settings.scf_max_iterations)
    return _ENGINES[key]


def compute_one(sp: Species, settings: Settings) -> SpeciesResult | SpeciesFailure:
    """One species, with every expected failure turned into a SpeciesFailure."""
    try:
        return compute_species(sp, settings, _engine_for(settings))
    except (ComputationError, EngineError, InputError, ValueError) as exc:
        return SpeciesFailure(str(exc).splitlines()[0] if str(exc) else type(exc).__name__)
    except RuntimeError as exc:  # RDKit/ASE errors
        return SpeciesFailure(f"{sp.smiles}: {type(exc).__name__}: {str(exc).splitlines()[0] if str(exc) else ''}")


def default_workers() -> int:
    return max(1, len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1))


def compute_many(species_list: Iterable[Species], settings: Settings, workers: int = 1,
                 progress: Callable[[Species, SpeciesResult | SpeciesFailure], None] | None = None
                 ) -> dict[Species, SpeciesResult | SpeciesFailure]:
    """Compute every distinct species; returns species → result or failure."""
    unique = list(dict.fromkeys(species_list))
    results: dict[Species, SpeciesResult | SpeciesFailure] = {}
    workers = max(1, min(int(workers), len(unique)))
    try:
        if workers == 1:
            for sp in unique:
                results[sp] = compute_one(sp, settings)
                if progress:
                    progress(sp, results[sp])
        else:
            _compute_in_pool(unique, settings, workers, progress, results)
    except KeyboardInterrupt:
        for sp in unique:
            results.setdefault(sp, SpeciesFailure("interrupted before this species finished"))
        raise Interrupted({sp: results[sp] for sp in unique}) from None
    return {sp: results[sp] for sp in unique}


def _compute_in_pool(unique, settings, workers, progress, results) -> None:
    context = multiprocessing.get_context("spawn")
    pool = ProcessPoolExecutor(max_workers=workers, mp_context=context)
    futures = {pool.submit(compute_one, sp, settings): sp for sp in unique}
    try:
        for future in as_completed(futures):
            sp = futures[future]
            try:
                results[sp] = future.result()
            except Exception as exc:  # a crashed worker fails its species only
                results[sp] = SpeciesFailure(f"{sp.smiles}: worker failed: {type(exc).__name__}: {exc}")
            if progress:
                progress(sp, results[sp])
    finally:
        pool.shutdown(wait=True, cancel_futures=True)
