"""One function per task, for notebooks and scripts: ``cationcalc.hia([...], solvent="water")``.

Each function takes SMILES (one string, a list of strings, or ``(smiles, name)``
pairs) and the options of the ``cationcalc`` command of the same name as
keywords (``solvent``, ``temperature`` in K, ``medium``, ``workers``, ``store``
a file path, …, with the command's defaults), refuses bad input with the
command line's one-line message (ValueError), runs the task and returns
:class:`Records`: the records in input order, as ``--json`` gives them, with
:meth:`Records.to_frame` for a pandas DataFrame (``pip install 'cationcalc[frame]'``).

Example
-------
>>> import cationcalc
>>> records = cationcalc.thermo("O", workers=1)
>>> records.task, records[0]["symmetry_number"], records[0]["point_group"]
('thermo', 2, 'C2v')
>>> cationcalc.hia("C[C+](C)C", solvent="watr")  # doctest: +ELLIPSIS
Traceback (most recent call last):
ValueError: unknown solvent 'watr': did you mean water? ...
"""

from __future__ import annotations

import os
import warnings
from collections.abc import Iterable, Mapping
from typing import TYPE_CHECKING, Any, Union

from cationcalc.chem.reference import NEAREST_CLASS
from cationcalc.compute.models import Settings

if TYPE_CHECKING:  # pragma: no cover
    import pandas

    from cationcalc.execution.store import ResultStore

#: what every function accepts as input: one SMILES, or a list of SMILES and (SMILES, name) pairs
Inputs = Union[str, Iterable[Union[str, tuple[str, str]]]]
#: a result store: a file path, an open ResultStore, or None
StoreLike = Union[str, "os.PathLike[str]", "ResultStore", None]

_DEFAULT = Settings()
_TEMPERATURE_K = _DEFAULT.temperature_k
_PRESSURE_PA = _DEFAULT.pressure_pa
_ENGINE = _DEFAULT.engine


class Records(list):
    """The records of one task run, in input order (each a dict or a read-only mapping).

    >>> rows = Records([{"name": "a", "hia_kcal_mol": 230.1}, {"name": "b", "error": "bad SMILES"}], task="hia")
    >>> rows.columns()
    ['name', 'hia_kcal_mol', 'error']
    """

    def __init__(self, records: Iterable[Mapping[str, Any]] = (), task: str = ""):
        super().__init__(records)
        #: the task that made these records (``hia``, ``rate``, …)
        self.task = task

    def columns(self) -> list[str]:
        """Every record key, in the order first seen (the columns of ``--csv``)."""
        keys: dict[str, None] = {}
        for record in self:
            keys.update(dict.fromkeys(dict(record)))
        return list(keys)

    def to_frame(self) -> "pandas.DataFrame":
        """A pandas DataFrame, one row per record, one column per key (lists and dicts kept as objects)."""
        try:
            import pandas
        except ImportError:
            raise ImportError("Records.to_frame needs pandas: pip install 'cationcalc[frame]'") from None
        return pandas.DataFrame([dict(r) for r in self], columns=self.columns())


# ------------------------------------------------------------------------------ the tasks


def hia(smiles: Inputs, *, solvent: str | None = None, reference: str = NEAREST_CLASS,
        calibrated: bool = False, refine: str | bool | None = None, refine_geometry: str | bool | None = None, engine: str = _ENGINE,
        temperature: float = _TEMPERATURE_K, pressure: float = _PRESSURE_PA, conformers: int | None = None,
        rrho: bool = False, mix_enantiomers: bool = False, workers: int | None = None, force: bool = False, thorough: bool = False,
        store: StoreLike = None, profile: bool = False) -> Records:
    """Hydride-ion affinities of carbocations (``cationcalc hia``), anchored on ``reference``."""
    return _run("hia", smiles, _common(locals()), reference=reference, calibrated=calibrated, refine=refine, refine_geometry=refine_geometry)


def heterolysis(smiles: Inputs, *, solvent: str | None = None, refine: str | bool | None = None, refine_geometry: str | bool | None = None,
                engine: str = _ENGINE, temperature: float = _TEMPERATURE_K, pressure: float = _PRESSURE_PA,
                conformers: int | None = None, rrho: bool = False, mix_enantiomers: bool = False,
                workers: int | None = None, force: bool = False, thorough: bool = False, store: StoreLike = None,
                profile: bool = False) -> Records:
    """R–X → R⁺ + X⁻ energies (``cationcalc heterolysis``)."""
    return _run("heterolysis", smiles, _common(locals()), refine=refine, refine_geometry=refine_geometry)


def thermo(smiles: Inputs, *, solvent: str | None = None, refine: str | bool | None = None, refine_geometry: str | bool | None = None, engine: str = _ENGINE,
           temperature: float = _TEMPERATURE_K, pressure: float = _PRESSURE_PA, conformers: int | None = None,
           rrho: bool = False, mix_enantiomers: bool = False, workers: int | None = None, force: bool = False, thorough: bool = False,
           store: StoreLike = None, profile: bool = False) -> Records:
    """Energy, ZPE, H, S, G, symmetry and frequencies of any species (``cationcalc thermo``)."""
    return _run("thermo", smiles, _common(locals()), refine=refine, refine_geometry=refine_geometry)


def ionize(smiles: Inputs, *, solvent: str | None = None, leaving_group: str = "auto", acid: bool = False,
           reference: str | None = None, shifts: bool = True, medium: str | None = None,
           refine: str | bool | None = None, refine_geometry: str | bool | None = None, engine: str = _ENGINE, temperature: float = _TEMPERATURE_K,
           pressure: float = _PRESSURE_PA, conformers: int | None = None, rrho: bool = False,
           mix_enantiomers: bool = False, workers: int | None = None, force: bool = False, thorough: bool = False,
           store: StoreLike = None, profile: bool = False) -> Records:
    """ΔG of R–X → R⁺ + X with a verdict (``cationcalc ionize``); ``reference`` is the substrate SMILES
    ΔΔG_ion is measured against, ``shifts=False`` is ``--no-shifts``, ``medium`` adds half-lives."""
    return _run("ionize", smiles, _common(locals()), leaving_group=leaving_group, acid=acid,
                reference_substrate=reference, shifts=shifts, medium=medium, refine=refine, refine_geometry=refine_geometry)


def sites(smiles: Inputs, *, solvent: str | None = None, acid: bool = False, hydride: bool = False,
          shifts: bool = True, calibrated: bool = False, refine: str | bool | None = None, refine_geometry: str | bool | None = None, engine: str = _ENGINE,
          temperature: float = _TEMPERATURE_K, pressure: float = _PRESSURE_PA, conformers: int | None = None,
          rrho: bool = False, mix_enantiomers: bool = False, workers: int | None = None, force: bool = False, thorough: bool = False,
          store: StoreLike = None, profile: bool = False) -> Records:
    """Every ionization site of a substrate, ranked (``cationcalc sites``); ``hydride`` scans every C–H."""
    return _run("sites", smiles, _common(locals()), acid=acid, hydride=hydride, shifts=shifts,
                calibrated=calibrated, refine=refine, refine_geometry=refine_geometry)


def ladder(smiles: Inputs, *, solvent: str | None = None, groups: str | Iterable[str] | None = None,
           medium: str | None = None, refine: str | bool | None = None, refine_geometry: str | bool | None = None, engine: str = _ENGINE,
           temperature: float = _TEMPERATURE_K, pressure: float = _PRESSURE_PA, conformers: int | None = None,
           rrho: bool = False, mix_enantiomers: bool = False, workers: int | None = None, force: bool = False, thorough: bool = False,
           store: StoreLike = None, profile: bool = False) -> Records:
    """ΔG_ion of one skeleton written with ``*`` for every leaving group (``cationcalc ladder``);
    ``groups`` a list of names (or one comma-separated text) limits the library."""
    if isinstance(groups, str):
        groups = groups.split(",")
    chosen = [g.strip() for g in groups if g.strip()] if groups is not None else None
    return _run("ladder", smiles, _common(locals()), groups=chosen or None, medium=medium, refine=refine, refine_geometry=refine_geometry)


def shifts(smiles: Inputs, *, solvent: str | None = None, depth: int | None = None,
           threshold: float | None = None, ceiling: float | None = None, barriers: bool = False,
           engine: str = _ENGINE, temperature: float = _TEMPERATURE_K, pressure: float = _PRESSURE_PA,
           conformers: int | None = None, rrho: bool = False, mix_enantiomers: bool = False,
           workers: int | None = None, force: bool = False, store: StoreLike = None,
           profile: bool = False) -> Records:
    """1,2-shifts and ring expansions of carbocations (``cationcalc shifts``): ``depth`` (longest path),
    ``threshold`` (kcal/mol, flags a downhill shift), ``ceiling`` (kcal/mol above the parent); None
    keeps the command's default."""
    return _run("shifts", smiles, _common(locals()), depth=depth, threshold_kcal_mol=threshold,
                ceiling_kcal_mol=ceiling, barriers=barriers)


def rate(smiles: Inputs, *, medium: str | list[str], temperature: float = _TEMPERATURE_K,
         leaving_group: str = "auto", conformers: int | None = None, workers: int | None = None,
         force: bool = False, store: StoreLike = None, profile: bool = False) -> Records:
    """Rate constant, half-life and cation lifetime of R–X in a solvolysis medium (``cationcalc rate``);
    ``medium`` as the trade writes it (``"80E20W"``, ``"80% ethanol"``, a list for several)."""
    common = {"solvent": None, "engine": _ENGINE, "pressure": _PRESSURE_PA, "rrho": False,
              "mix_enantiomers": False, **_common(locals())}
    return _run("rate", smiles, common, leaving_group=leaving_group, medium=medium)


# ------------------------------------------------------------------------------ shared steps

_COMMON = ("solvent", "engine", "temperature", "pressure", "conformers", "rrho", "mix_enantiomers", "workers",
           "force", "thorough", "store", "profile")


def _common(arguments: dict) -> dict:
    """The options every task shares, picked from a task function's arguments."""
    return {k: arguments[k] for k in _COMMON if k in arguments}


def _run(task: str, smiles: Inputs, common: dict, **options: Any) -> Records:
    """Check the input as the command line does, compute, and return the records."""
    items = _items(smiles, task)
    options = {k: v for k, v in options.items() if v is not None}
    if common.get("thorough") and task in ("ionize", "sites"):  # every site and shift product in full
        options.update(site_window_kcal_mol=None, shift_window_kcal_mol=None)
    if options.get("refine") is True:
        from cationcalc.execution.refine import DEFAULT_LEVEL

        options["refine"] = DEFAULT_LEVEL
    settings = _settings(task, common)
    _check_options(task, settings, common["temperature"], options)
    workers = _positive("workers", common["workers"]) if common["workers"] is not None else None
    if workers is None:
        from cationcalc.execution.executors import default_workers

        workers = default_workers()
    records = _compute(task, items, settings, workers, bool(common["force"]), common["store"], options)
    if not common["profile"]:  # new records without the time profile, as the command line prints them
        records = [r.with_values(drop=("profile",)) for r in records]
    return Records(records, task=task)


def _items(smiles: Inputs, task: str) -> list[tuple[str, str]]:
    """(SMILES, name) pairs from one SMILES, a list of SMILES, or (SMILES, name) pairs."""
    if isinstance(smiles, str):
        smiles = [smiles]
    items: list[tuple[str, str]] = []
    for entry in smiles:
        if isinstance(entry, str):
            items.append((entry, ""))
        elif isinstance(entry, (tuple, list)) and len(entry) == 2 and all(isinstance(x, str) for x in entry):
            items.append((entry[0], entry[1]))
        else:
            raise TypeError(f"input {entry!r} is neither a SMILES text nor a (SMILES, name) pair")
    if not items:
        raise ValueError(f"no inputs: give SMILES, e.g. cationcalc.{task}('C[C+](C)C')")
    return items


def _positive(what: str, value: int) -> int:
    """``value`` as an int of at least 1 (workers, conformers); the command line's message otherwise."""
    if isinstance(value, bool) or not isinstance(value, int):
        raise ValueError(f"{what}: {value!r} is not a whole number")
    if value < 1:
        raise ValueError(f"{what}: {value} is below 1; give 1 or more")
    return value


def _settings(task: str, common: dict) -> Settings:
    """The Settings the command line builds from the same options (ranges checked with its messages)."""
    from cationcalc.chem.conformers import ConformerSettings
    from cationcalc.compute.models import check_pressure_pa, check_temperature_k
    from cationcalc.engines.solvents import normalise_solvent

    solvent = normalise_solvent(common["solvent"])
    if task != "rate":  # the rate task checks its own (narrower) temperature range
        check_temperature_k(common["temperature"])
    check_pressure_pa(common["pressure"])
    if common["engine"] not in ("tblite", "xtb"):
        raise ValueError(f"engine {common['engine']!r} is not offered: choose tblite or xtb")
    conformers = {}
    if common["conformers"] is not None:
        conformers["max_conformers"] = _positive("conformers", common["conformers"])
    temperature = common["temperature"] if task != "rate" else _TEMPERATURE_K
    settings = Settings(engine=common["engine"], solvent=solvent, temperature_k=temperature,
                        pressure_pa=common["pressure"], conformers=ConformerSettings(**conformers),
                        qrrho=not common["rrho"], enantiomer_mixing=bool(common["mix_enantiomers"]))
    return settings.full_protocol() if common.get("thorough") else settings


def _check_options(task: str, settings: Settings, temperature: float, options: dict) -> None:
    """Refuse, before anything is computed, what the command line refuses (ValueError, one line)."""
    from cationcalc.chem.leaving_groups import leaving_group

    if task == "hia":
        from cationcalc.chem.reference import check_hia_reference

        check_hia_reference(options["reference"])
    if options.get("medium") is not None:
        from cationcalc.chem.media import medium
        from cationcalc.tasks.rate import check_temperature

        media = options["medium"] if isinstance(options["medium"], (list, tuple)) else [options["medium"]]
        for name in media:
            medium(name)
        options["rate_temperature_k"] = check_temperature(temperature)
    if options.get("leaving_group", "auto") != "auto":
        leaving_group(options["leaving_group"])
    for name in options.get("groups") or []:
        leaving_group(name)
    if options.get("refine_geometry") and not options.get("refine"):
        raise ValueError("refine_geometry needs refine: give refine=True or refine='LEVEL'")
    if options.get("refine"):
        from cationcalc.engines.pyscf_engine import require_pyscf
        from cationcalc.execution.refine import parse_geometry_level, parse_level

        parse_level(options["refine"])
        parse_geometry_level(options.get("refine_geometry"))
        require_pyscf()
    if settings.engine == "xtb":
        _check_xtb(settings)


def _check_xtb(settings: Settings) -> None:
    """xtb-python installed, and GBSA parameters for the solvent."""
    try:
        import xtb  # noqa: F401
    except ImportError:
        raise ImportError("engine 'xtb' needs xtb-python: pip install 'cationcalc[xtb]' (Python <= 3.11)") from None
    from cationcalc.engines.solvents import GBSA_NAMES

    if settings.solvent is not None and settings.solvent not in GBSA_NAMES:
        raise ValueError(f"solvent {settings.solvent!r} has no GBSA parameters in xtb-python; use engine "
                         f"'tblite' or one of: {', '.join(sorted(GBSA_NAMES))}")


def _compute(task: str, items: list[tuple[str, str]], settings: Settings, workers: int, force: bool,
             store: StoreLike, options: dict) -> list:
    """Run the task with a store opened from a path (and closed again) or the one given."""
    from cationcalc.execution.store import ResultStore

    opened = ResultStore(store) if isinstance(store, (str, os.PathLike)) else None
    try:
        where = opened if opened is not None else store
        if task == "shifts":
            from cationcalc.tasks.shifts import run_shifts

            records = run_shifts(items, settings, workers=workers, force=force, store=where, **options)
        else:
            from cationcalc.tasks.runner import run_task

            records = run_task(task, items, settings, workers=workers, force=force, store=where, **options)
        if where is not None and where.write_error:
            warnings.warn(f"the result store {where.path} could not be written ({where.write_error}); the records "
                          "are complete but not stored", RuntimeWarning, stacklevel=4)
        return records
    finally:
        if opened is not None:
            opened.close()


__all__ = ["Records", "hia", "heterolysis", "thermo", "ionize", "sites", "ladder", "shifts", "rate"]
