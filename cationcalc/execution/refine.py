"""DFT refinement: density-functional single points on GFN2-xTB structures ("DFT//xTB").

GFN2-xTB is the screening method; it misjudges resonance-stabilised cations
(benzyl cation's HIA comes out about 13 kcal/mol too high).  A refined
species keeps everything GFN2-xTB gave it (geometry, conformer choice,
frequencies, ZPE, thermal corrections, entropy) and replaces the electronic
energy with a DFT single point at the GFN2-xTB geometry: with
ΔE = E_DFT − E_xTB at that geometry, E, H and G are all shifted by ΔE.  This
is the usual DFT//xTB composite, and every refined result says so in its
``level`` (``wB97X-D3BJ/def2-TZVP//GFN2-xTB (gas)``).

Levels are written as the trade writes them, functional/basis[/solvent
model]; ``ωB97X-D3(BJ)`` and ``wB97X-D3BJ`` are the same name:

==========================  ==========================================
``B3LYP-D3BJ/def2-SVP``     cheapest; for quick checks
``wB97X-D3BJ/def2-SVP``     range-separated hybrid, small basis
``r2SCAN-D4/def2-SVP``      meta-GGA (finer grid), small basis
``B3LYP-D3BJ/def2-TZVP``
``wB97X-D3BJ/def2-TZVP``    the default (:data:`DEFAULT_LEVEL`)
``r2SCAN-D4/def2-TZVP``
==========================  ==========================================

The default was chosen from ``benchmarks/dft_levels.py`` (the gas-phase
HIA set; table in ``benchmarks/results/dft_levels.md``): wB97X-D3BJ/def2-TZVP
has the lowest mean and maximum error.  Refined HIAs are anchored by class
(:func:`cationcalc.chem.reference.class_anchor`: acylium ions on acetyl, the
rest on tert-butyl), which cancels the one error every functional shares,
the overbinding of a hydride by an acylium ion (CCSD(T)/def2-TZVP puts HCO⁺
and acetyl within 0.5 kcal/mol of experiment relative to 2-propyl,
benchmarks/coupled_cluster_check.py).  On the nine cations of the set
(benchmarks/class_anchors.py) the MAE of wB97X-D3BJ/def2-TZVP//GFN2-xTB is
1.36 kcal/mol with the class anchor (2.56 on tert-butyl alone; GFN2-xTB raw
16.6, calibrated 5.2 leave-one-out).  Cost: 10 s per species on average,
48 s for adamantane (26 atoms, 406 basis functions) on two shared cores.

Density fitting is always on; dispersion comes from ``pyscf-dispersion``.

Solvent (``settings.solvent`` set): by default the GFN2-xTB ALPB solvation
free energy at the same geometry, E_xTB(ALPB) − E_xTB(gas), is added to the
gas-phase DFT energy (cheap: two GFN2-xTB single points).  Append ``/CPCM``
or ``/SMD`` to the level to solvate the DFT calculation itself in PySCF
(C-PCM about 3× the gas-phase cost, SMD about 7×; SMD for the solvents in
PySCF's SMD table).  The refined ``level`` and the records' ``refine_note``
say which was used.  Never mix solvent models within one difference: every
species of a task is refined the same way.

Cost: before anything runs, :func:`estimate_cost` gives the number of basis
functions, the memory (the density-fitting three-index tensor dominates) and
the expected seconds.  A species with more than :data:`MAX_BASIS_FUNCTIONS`
basis functions (≈ 45 heavy atoms at def2-SVP, ≈ 25 at def2-TZVP) is refused
unless ``force=True`` (``--force``): it would take tens of minutes to hours
per single point on a laptop.

Example
-------
>>> from cationcalc.execution.refine import parse_level, DEFAULT_LEVEL
>>> parse_level("ωB97X-D3(BJ)/def2-TZVP").name
'wB97X-D3BJ/def2-TZVP'
>>> parse_level("b3lyp-d3bj/def2-svp/smd").solvent_model
'SMD'
>>> from cationcalc.execution.refine import estimate_cost
>>> estimate_cost([1, 1], "B3LYP-D3BJ/def2-SVP").n_basis
10
"""

from __future__ import annotations

import hashlib
import time
from dataclasses import dataclass
from collections.abc import Mapping
from typing import Callable, Sequence

from cationcalc.chem import units
from cationcalc.compute.models import Profile, Settings, SpeciesResult
from cationcalc.execution.store import ResultStore

#: what an unlabelled --refine uses (see the module notes for why)
DEFAULT_LEVEL = "wB97X-D3BJ/def2-TZVP"
#: above this many basis functions a species needs force=True
MAX_BASIS_FUNCTIONS = 800
#: solvent models a level may name after the basis
SOLVENT_MODELS = ("ALPB", "CPCM", "SMD")
#: the level DFT geometries are optimised at when --refine-geometry names none (see the module notes)
DEFAULT_GEOMETRY_LEVEL = "B3LYP-D3BJ/def2-SVP"
#: convergence of a DFT geometry: max |F| in eV/Å, and the step limit
DFT_GEOMETRY_FMAX = 0.02
DFT_GEOMETRY_MAX_STEPS = 150
#: gradient steps a DFT geometry optimisation from a GFN2-xTB minimum is assumed to take (cost estimate);
#: a gradient costs about GRADIENT_COST single points
ASSUMED_GEOMETRY_STEPS = 12
GRADIENT_COST = 1.6


class RefineError(ValueError):
    """A refinement request cationcalc refuses (unknown level, too large, …): one line with the fix."""


@dataclass(frozen=True)
class Functional:
    name: str           # as the trade writes it
    xc: str             # PySCF functional string, dispersion suffix included
    grid_level: int     # PySCF grid level (meta-GGAs need a finer grid)


FUNCTIONALS = {
    "B3LYP-D3BJ": Functional("B3LYP-D3BJ", "b3lyp-d3bj", 3),
    "wB97X-D3BJ": Functional("wB97X-D3BJ", "wb97x-d3bj", 3),
    "r2SCAN-D4": Functional("r2SCAN-D4", "r2scan-d4", 4),
}
BASES = {"def2-SVP": "def2-svp", "def2-TZVP": "def2-tzvp"}
#: time model per level: seconds of one gas-phase single point at 100 basis functions on 2 threads and the
#: power of the basis-size scaling, fitted in benchmarks/dft_levels.py (24 species, 29–406 basis functions,
#: 2 shared cores; results/dft_levels.json)
COST_FIT: dict[str, tuple[float, float]] = {
    "B3LYP-D3BJ/def2-SVP": (6.3, 1.85),
    "wB97X-D3BJ/def2-SVP": (7.2, 1.78),
    "r2SCAN-D4/def2-SVP": (12.2, 2.01),
    "B3LYP-D3BJ/def2-TZVP": (2.5, 1.92),
    "wB97X-D3BJ/def2-TZVP": (2.9, 1.90),
    "r2SCAN-D4/def2-TZVP": (6.2, 2.18),
}
#: speed-up of PySCF from 1 to 2 OpenMP threads (benzyl cation at the default level, benchmarks/dft_levels.py)
TWO_THREAD_SPEEDUP = 1.33
#: mean absolute error (kcal/mol) of each level on the nine cations of the gas-phase HIA set with the class
#: anchor refined values use (benchmarks/class_anchors.py, "shipped rule"; on tert-butyl alone 4.45, 2.61, 4.91,
#: 4.78, 2.56, 4.87)
BENCHMARK_MAE_KCAL_MOL: dict[str, float] = {
    "B3LYP-D3BJ/def2-SVP": 3.05, "wB97X-D3BJ/def2-SVP": 1.53, "r2SCAN-D4/def2-SVP": 3.77,
    "B3LYP-D3BJ/def2-TZVP": 3.24, "wB97X-D3BJ/def2-TZVP": 1.36, "r2SCAN-D4/def2-TZVP": 3.77,
}


@dataclass(frozen=True)
class Level:
    """One offered DFT level, optionally with the way solvation enters."""

    functional: Functional
    basis: str
    solvent_model: str | None = None  # None: default (ALPB added in solution), "ALPB", "CPCM", "SMD"

    @property
    def name(self) -> str:
        return f"{self.functional.name}/{self.basis}"

    @property
    def label(self) -> str:
        """The name with the solvent model when one was given (``B3LYP-D3BJ/def2-SVP/SMD``)."""
        return self.name + (f"/{self.solvent_model}" if self.solvent_model else "")

    @property
    def pyscf_basis(self) -> str:
        return BASES[self.basis]


def offered_levels() -> list[str]:
    """Names of every offered level (functional/basis)."""
    return [f"{f}/{b}" for b in BASES for f in FUNCTIONALS]


def _squash(text: str) -> str:
    return (text.replace("ω", "w").replace("Ω", "w").replace("(", "").replace(")", "").replace(" ", "")
            .replace("_", "-").lower())


def parse_level(text: str | Level) -> Level:
    """A :class:`Level` from 'functional/basis[/ALPB|CPCM|SMD]'; RefineError lists the offered levels."""
    if isinstance(text, Level):
        return text
    raw = str(text or "").strip()
    parts = [p for p in raw.split("/")]
    solvent_model = None
    if len(parts) == 3:
        model = _squash(parts[2]).replace("-", "").upper()
        if model not in SOLVENT_MODELS:
            raise RefineError(f"unknown solvent model {parts[2]!r} in level {raw!r}: use one of "
                              + ", ".join(SOLVENT_MODELS) + " (or leave it out: ALPB)")
        solvent_model = model
        parts = parts[:2]
    if len(parts) == 2:
        f_key = next((k for k in FUNCTIONALS if _squash(k) == _squash(parts[0])), None)
        b_key = next((k for k in BASES if _squash(k) == _squash(parts[1])), None)
        if f_key and b_key:
            return Level(FUNCTIONALS[f_key], b_key, solvent_model)
    raise RefineError(f"unknown DFT level {raw!r}: choose one of {', '.join(offered_levels())} "
                      "(optionally /CPCM or /SMD for solvation in the DFT calculation)")


# ---------------------------------------------------------------- cost

@dataclass(frozen=True)
class CostEstimate:
    n_basis: int
    n_aux: int
    memory_mb: float
    seconds: float
    threads: int
    over_limit: bool

    def describe(self, what: str = "") -> str:
        head = f"{what}: " if what else ""
        return (f"{head}{self.n_basis} basis functions ({self.n_aux} fitting functions), ~{self.memory_mb:.0f} MB, "
                f"~{_duration(self.seconds)} on {self.threads} thread{'s' if self.threads > 1 else ''}"
                + (f" — above the limit of {MAX_BASIS_FUNCTIONS} basis functions" if self.over_limit else ""))


def _duration(seconds: float) -> str:
    if seconds < 90:
        return f"{seconds:.0f} s"
    if seconds < 5400:
        return f"{seconds / 60:.0f} min"
    return f"{seconds / 3600:.1f} h"


def estimate_cost(numbers: Sequence[int], level: str | Level, threads: int = 1) -> CostEstimate:
    """Basis-set size, memory and time of one single point, before running it.

    Memory: the density-fitting tensor (n_aux × n(n+1)/2 doubles) plus
    ten n×n matrices and 300 MB for PySCF itself.  Time: a power law in the
    number of basis functions fitted per level on the benchmark set
    (gas phase; C-PCM ×3, SMD ×7 as measured in the engine notes), scaled
    to the thread count.
    """
    from cationcalc.engines.pyscf_engine import count_basis_functions

    lvl = parse_level(level)
    n = count_basis_functions(numbers, lvl.pyscf_basis)
    n_aux = count_basis_functions(numbers, "def2-universal-jkfit")
    memory_mb = (n_aux * n * (n + 1) / 2 * 8 + 10 * n * n * 8) / 1e6 + 300.0
    at_100, power = COST_FIT[lvl.name]
    seconds = at_100 * (n / 100.0) ** power
    seconds *= {"CPCM": 3.0, "SMD": 7.0}.get(lvl.solvent_model or "", 1.0)
    if threads <= 1:
        seconds *= TWO_THREAD_SPEEDUP
    return CostEstimate(n, n_aux, memory_mb, seconds, max(1, int(threads)), n > MAX_BASIS_FUNCTIONS)


def available_memory_mb() -> float | None:
    """Memory this machine has available now (MB; Linux /proc/meminfo), None where it cannot be read."""
    try:
        with open("/proc/meminfo") as handle:
            for line in handle:
                if line.startswith("MemAvailable:"):
                    return float(line.split()[1]) / 1024.0
    except OSError:
        return None
    return None


def scf_memory_mb(estimate: CostEstimate, available: float | None = None) -> float:
    """PySCF's memory allowance for one single point: the estimate with 25 % headroom, at least PySCF's own
    default (4000 MB), at most 80 % of the memory available.

    Below the density-fitting tensor's size PySCF moves the tensor to disk and the SCF runs many times
    slower (measured: a 691-function cation over 25 min instead of the ~4 min estimated).

    >>> scf_memory_mb(CostEstimate(691, 3451, 6939.0, 240.0, 2, False), available=20000.0)
    8673.75
    >>> scf_memory_mb(CostEstimate(300, 1490, 860.0, 49.0, 2, False), available=20000.0)
    4000.0
    """
    available = available_memory_mb() if available is None else available
    wanted = max(4000.0, 1.25 * estimate.memory_mb)
    return wanted if available is None else min(wanted, max(4000.0, 0.8 * available))


# ---------------------------------------------------------------- refinement

@dataclass(frozen=True)
class Refinement:
    """What one refinement did (kept beside the refined SpeciesResult)."""

    level: str
    solvation: str              # "gas phase", "C-PCM(water) in PySCF", "GFN2-xTB ALPB(water) ΔG_solv added"
    E_dft_hartree: float        # DFT energy at the geometry (solvation included as described)
    E_xtb_hartree: float        # GFN2-xTB energy at the same geometry (solvation included)
    shift_hartree: float        # E_dft − E_xtb, added to E, H and G
    n_basis: int
    seconds: float
    scf_route: str
    estimate: CostEstimate


def solvation_label(level: Level, settings: Settings) -> str:
    """How solvation enters the refined energies, in words."""
    if settings.solvent is None:
        return "gas phase"
    model = level.solvent_model or "ALPB"
    if model == "ALPB":
        return (f"GFN2-xTB {settings.solvent_model}({settings.solvent}) solvation free energy added to the "
                "gas-phase DFT energy")
    return f"{'C-PCM' if model == 'CPCM' else 'SMD'}({settings.solvent}) in the DFT calculation (PySCF)"


def refined_level_name(level: Level, result_level: str, settings: Settings, geometry: Level | None = None) -> str:
    """The refined result's level: DFT//xTB with the solvation route, e.g. wB97X-D3BJ/def2-TZVP//GFN2-xTB (gas),
    or DFT//DFT with the thermal corrections' level, wB97X-D3BJ/def2-TZVP//B3LYP-D3BJ/def2-SVP (thermal:
    GFN2-xTB (gas))."""
    if geometry is not None:
        base = refined_level_name(level, result_level, settings)
        return base.replace(f"//{result_level}", f"//{geometry.name} (thermal: {result_level})")
    if settings.solvent is None:
        return f"{level.name}//{result_level}"
    model = level.solvent_model or "ALPB"
    dft = (f"{level.name}+ΔG_solv[{settings.solvent_model}]" if model == "ALPB"
           else f"{level.name}/{'C-PCM' if model == 'CPCM' else 'SMD'}({settings.solvent})")
    return f"{dft}//{result_level}"


def is_refined(result: SpeciesResult) -> bool:
    """Whether a species result carries a DFT energy (its level names two levels, ``DFT//…``)."""
    return "//" in result.level


def refined_key(result: SpeciesResult, level: Level, settings: Settings, geometry: Level | None = None) -> str:
    """Store key of a refined result: the species key plus the level, the solvation route and the geometry level."""
    payload = f"{result.key}|refine|{level.name}|{solvation_label(level, settings)}"
    if geometry is not None:
        payload += f"|geometry|{geometry.name}|{DFT_GEOMETRY_FMAX}"
    return hashlib.sha256(payload.encode()).hexdigest()


def parse_geometry_level(text: str | Level | bool | None) -> Level | None:
    """The level DFT geometries are optimised at: None (GFN2-xTB geometries), True → the default level."""
    if text is None or text is False:
        return None
    level = parse_level(DEFAULT_GEOMETRY_LEVEL if text is True else text)
    if level.solvent_model is not None:
        raise RefineError(f"DFT geometries are optimised in the gas phase; drop /{level.solvent_model} from "
                          f"{level.label!r}")
    return level


def estimate_geometry_cost(numbers: Sequence[int], geometry: Level, threads: int = 1) -> CostEstimate:
    """Cost of a DFT geometry optimisation: ASSUMED_GEOMETRY_STEPS gradients of GRADIENT_COST single points."""
    single = estimate_cost(numbers, geometry, threads)
    return CostEstimate(single.n_basis, single.n_aux, single.memory_mb,
                        single.seconds * ASSUMED_GEOMETRY_STEPS * GRADIENT_COST, single.threads, single.over_limit)


@dataclass(frozen=True)
class DFTGeometry:
    """A structure optimised at a DFT level, and what it took."""

    positions_angstrom: list
    gradients: int
    converged: bool
    fmax_ev_per_angstrom: float
    seconds: float
    bonding_changed: str = ""


def optimise_dft_geometry(result: SpeciesResult, geometry: Level, *, threads: int | None = None,
                          max_memory_mb: float | None = None) -> DFTGeometry:
    """Relax the result's (GFN2-xTB) structure at a gas-phase DFT level with ASE's LBFGS on analytic gradients."""
    from cationcalc.chem.bonding import bonds_from_geometry, compare_bonding
    from cationcalc.compute.optimize import optimize
    from cationcalc.engines.pyscf_engine import DFTEngine

    engine = DFTEngine(geometry.name, geometry.functional.xc, geometry.pyscf_basis,
                       grid_level=geometry.functional.grid_level, threads=threads, max_memory_mb=max_memory_mb)
    start = time.perf_counter()
    relaxed = optimize(result.numbers, result.positions_angstrom, engine, charge=result.charge,
                       multiplicity=result.multiplicity, fmax=DFT_GEOMETRY_FMAX, max_steps=DFT_GEOMETRY_MAX_STEPS)
    before = bonds_from_geometry(result.numbers, result.positions_angstrom)
    change = compare_bonding(before, result.numbers, relaxed.positions, result.charge)
    changed = (change.relaxed_smiles or "a bridged structure") if change.changed else ""
    return DFTGeometry(relaxed.positions.tolist(), engine.counters.calls, relaxed.converged, relaxed.max_force_ev_per_angstrom,
                       time.perf_counter() - start, changed)


def _xtb_energy_hartree(result: SpeciesResult, settings: Settings, solvent: str | None,
                        positions_angstrom: list | None = None) -> float:
    from cationcalc.engines import get_engine

    engine = get_engine(settings.engine, max_iterations=settings.scf_max_iterations)
    positions = result.positions_angstrom if positions_angstrom is None else positions_angstrom
    r = engine.compute(result.numbers, positions, charge=result.charge,
                       multiplicity=result.multiplicity, solvent=solvent)
    return r.energy_ev / units.HARTREE_EV


def refine_species(result: SpeciesResult, level: str | Level, settings: Settings, *, force: bool = False,
                   threads: int | None = None, geometry: Level | None = None) -> tuple[SpeciesResult, Refinement]:
    """The refined result and what was done; RefineError/ChargeMultiplicityError/DFTConvergenceError on failure.

    With ``geometry`` (a gas-phase DFT level) the structure is first optimised at that level, and the single
    point runs on the DFT structure (DFT//DFT); the thermal corrections stay those of GFN2-xTB.
    """
    from cationcalc.engines.pyscf_engine import dft_single_point, require_pyscf, spin_of

    lvl = parse_level(level)
    what = f"{result.smiles} (charge {result.charge:+d}, multiplicity {result.multiplicity})"
    spin_of(result.numbers, result.charge, result.multiplicity, what)
    require_pyscf()
    if settings.solvent is None and lvl.solvent_model in ("CPCM", "SMD"):
        raise RefineError(f"level {lvl.name}/{lvl.solvent_model} names a solvent model but no solvent is set; "
                          "give --solvent or drop the solvent model from the level")
    n_threads = int(threads) if threads else 1
    estimate = estimate_cost(result.numbers, lvl, n_threads)
    if estimate.over_limit and not force:
        raise RefineError(f"{result.smiles}: {estimate.n_basis} basis functions at {lvl.name} exceed the limit of "
                          f"{MAX_BASIS_FUNCTIONS} (~{_duration(estimate.seconds)}, ~{estimate.memory_mb:.0f} MB); "
                          "use --force to run it anyway or a def2-SVP level")
    start = time.perf_counter()
    positions, dft_geometry = result.positions_angstrom, None
    if geometry is not None:
        geometry_estimate = estimate_geometry_cost(result.numbers, geometry, n_threads)
        dft_geometry = optimise_dft_geometry(result, geometry, threads=threads,
                                             max_memory_mb=scf_memory_mb(geometry_estimate))
        positions = dft_geometry.positions_angstrom
    model = None
    if settings.solvent is not None and lvl.solvent_model in ("CPCM", "SMD"):
        model = "C-PCM" if lvl.solvent_model == "CPCM" else "SMD"
    dft = dft_single_point(result.numbers, positions, charge=result.charge,
                           multiplicity=result.multiplicity, xc=lvl.functional.xc, basis=lvl.pyscf_basis,
                           grid_level=lvl.functional.grid_level, solvent=settings.solvent, solvent_model=model,
                           threads=threads, max_memory_mb=scf_memory_mb(estimate), what=what)
    e_dft = dft.energy_hartree
    e_xtb = _xtb_energy_hartree(result, settings, settings.solvent)
    if settings.solvent is not None and model is None:
        # + ΔG_solv(ALPB) at the geometry of the single point
        e_dft += (_xtb_energy_hartree(result, settings, settings.solvent, positions)
                  - _xtb_energy_hartree(result, settings, None, positions))
    shift = e_dft - e_xtb
    seconds = time.perf_counter() - start
    label = refined_level_name(lvl, result.level, settings, geometry)
    warnings = list(result.warnings) + _geometry_warnings(result, geometry, dft_geometry)
    if result.rearranged:
        warnings.append(f"refined as what GFN2-xTB relaxed it to ({result.relaxed_smiles or 'a bridged structure'}; "
                        f"{result.bonding_change}): the DFT energy belongs to that structure")
    if dft.scf_route != "DIIS":
        warnings.append(f"{lvl.name} SCF of {result.smiles} converged only with the second-order (Newton) solver")
    if dft.s_squared is not None:
        s = (result.multiplicity - 1) / 2
        if abs(dft.s_squared - s * (s + 1)) > 0.1:
            warnings.append(f"{lvl.name} of {result.smiles}: spin contamination ⟨S²⟩ = {dft.s_squared:.3f} "
                            f"(ideal {s * (s + 1):.3f})")
    gradients = dict(result.profile.gradients)
    gradients["dft_single_point"] = gradients.get("dft_single_point", 0) + 1
    if dft_geometry is not None:
        gradients["dft_gradient"] = gradients.get("dft_gradient", 0) + dft_geometry.gradients
    profile = Profile(wall_s=result.profile.wall_s + seconds, engine_s=result.profile.engine_s + dft.seconds,
                      gradients=gradients)
    refined = result.model_copy(update={
        "E_hartree": result.E_hartree + shift, "H_hartree": result.H_hartree + shift,
        "G_hartree": result.G_hartree + shift, "level": label, "key": refined_key(result, lvl, settings, geometry),
        "positions_angstrom": [list(map(float, xyz)) for xyz in positions],
        "warnings": warnings, "profile": profile})
    info = Refinement(level=lvl.name, solvation=solvation_label(lvl, settings), E_dft_hartree=e_dft,
                      E_xtb_hartree=e_xtb, shift_hartree=shift, n_basis=dft.n_basis, seconds=seconds,
                      scf_route=dft.scf_route, estimate=estimate)
    return refined, info


def _geometry_warnings(result: SpeciesResult, geometry: Level | None, found: DFTGeometry | None) -> list[str]:
    """What a DFT geometry optimisation needs to tell the reader."""
    if geometry is None or found is None:
        return []
    out = []
    if not found.converged:
        out.append(f"{geometry.name} geometry of {result.smiles} not converged in {found.gradients} gradients "
                   f"(max force {found.fmax_ev_per_angstrom:.3f} eV/Å)")
    if found.bonding_changed:
        out.append(f"at {geometry.name} {result.smiles} relaxed to {found.bonding_changed}: the refined energy "
                   "belongs to that structure, the thermal corrections to the GFN2-xTB one")
    return out


def refine_result(result: SpeciesResult, level: str | Level, settings: Settings, *, force: bool = False,
                  threads: int | None = None, geometry: str | Level | bool | None = None) -> SpeciesResult:
    """E_DFT at the GFN2-xTB geometry, thermal corrections from the GFN2-xTB Hessian (DFT//xTB).

    H and G are shifted by E_DFT − E_xTB at the geometry of the result; the
    ``level`` of the returned result names both levels.  A result whose
    bonding changed (``rearranged``) is refined as what it became, with a
    warning.  Raises for an impossible charge/multiplicity, a species above
    the size limit (unless ``force``) or an SCF that does not converge.
    With ``geometry`` (True for :data:`DEFAULT_GEOMETRY_LEVEL`, or a level)
    the single point runs on a DFT-optimised structure instead (DFT//DFT).
    """
    return refine_species(result, level, settings, force=force, threads=threads,
                          geometry=parse_geometry_level(geometry))[0]


def refine_many(results: dict, level: str | Level, settings: Settings, *, force: bool = False,
                threads: int | None = None, store: ResultStore | None = None, log: Callable[[str], None] | None = None,
                geometry: str | Level | bool | None = None) -> dict:
    """Refine every SpeciesResult in ``results`` (key → result); failures become SpeciesFailure.

    Estimates are sent to ``log`` (one line per species, then a total) before
    anything runs.  With a ``store``, refined results are looked up and saved
    under :func:`refined_key`.  Returns key → (refined result or failure) and,
    for the computed ones, key → :class:`Refinement` in ``out.info``.
    """
    from cationcalc.engines.base import EngineError
    from cationcalc.execution.executors import SpeciesFailure

    lvl, geo = parse_level(level), parse_geometry_level(geometry)
    out = _Refined()
    todo = []
    for key, result in results.items():
        if isinstance(result, SpeciesFailure):
            out[key] = result
            continue
        if store is not None:
            cached = store.get(refined_key(result, lvl, settings, geo))
            if cached is not None:
                out[key] = cached
                continue
        todo.append(key)
    estimates, geometry_estimates = {}, {}
    n_threads = int(threads) if threads else 1
    for key in todo:
        r = results[key]
        try:
            estimates[key] = estimate_cost(r.numbers, lvl, n_threads)
            if geo is not None:
                geometry_estimates[key] = estimate_geometry_cost(r.numbers, geo, n_threads)
        except Exception as exc:  # noqa: BLE001 - a basis without this element
            out[key] = SpeciesFailure(f"{r.smiles}: {lvl.name}: {str(exc).splitlines()[0]}")
            estimates.pop(key, None)
    if log and estimates:
        _log_estimates(log, lvl, geo, {k: results[k].smiles for k in estimates}, estimates, geometry_estimates)
    for key in estimates:
        r = results[key]
        try:
            refined, info = refine_species(r, lvl, settings, force=force, threads=threads, geometry=geo)
        except (EngineError, ValueError) as exc:
            out[key] = SpeciesFailure(f"{lvl.name} refinement: {str(exc).splitlines()[0]}")
            continue
        out[key] = refined
        out.info[key] = info
        if store is not None:
            store.put(refined, settings)
    return out


def _log_estimates(log: Callable[[str], None], level: Level, geometry: Level | None, names: dict,
                   estimates: dict, geometry_estimates: dict) -> None:
    """One line per species and a total, before anything runs."""
    for key, est in estimates.items():
        log(f"refine {level.name}: " + est.describe(names[key]))
        if key in geometry_estimates:
            log(f"  geometry at {geometry.name}: ~{_duration(geometry_estimates[key].seconds)} "
                f"(~{ASSUMED_GEOMETRY_STEPS} gradients assumed)")
    total = sum(e.seconds for e in estimates.values()) + sum(e.seconds for e in geometry_estimates.values())
    what = f"{len(estimates)} single point{'s' if len(estimates) > 1 else ''}"
    if geometry_estimates:
        what += f" on {geometry.name} geometries"
    log(f"refine {level.name}: {what}, ~{_duration(total)} in all; "
        f"largest ~{max(e.memory_mb for e in estimates.values()):.0f} MB")


# ---------------------------------------------------------------- task records

#: unit suffixes of record keys that get a GFN2-xTB twin (``hia_kcal_mol`` → ``hia_xtb_kcal_mol``)
_UNIT_SUFFIXES = ("_kcal_mol", "_kJ_mol", "_hartree")
#: record keys with units that are inputs, not computed values: no twin
_NOT_COMPUTED = {"reference_hia_kcal_mol", "threshold_kcal_mol"}
#: the value a ranking is made on, per task (lower = more stable cation / easier ionization)
_RANKING_KEYS = {"hia": ("hia_kcal_mol",), "heterolysis": ("dG_het_kcal_mol",),
                 "ionize": ("dG_ion_kcal_mol",), "sites": ("dG_ion_kcal_mol", "hia_kcal_mol"),
                 "ladder": ("dG_ion_kcal_mol",)}


def xtb_key(key: str) -> str | None:
    """``hia_kcal_mol`` → ``hia_xtb_kcal_mol``; None for a key without a unit suffix."""
    for suffix in _UNIT_SUFFIXES:
        if key.endswith(suffix):
            return key[: -len(suffix)] + "_xtb" + suffix
    return None


def _is_number(value) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def merge_records(refined: Mapping, xtb: Mapping) -> dict:
    """The refined record with each computed GFN2-xTB value right after its refined twin."""
    out = {}
    for key, value in refined.items():
        out[key] = value
        twin = xtb_key(key)
        if twin and key not in _NOT_COMPUTED and key in xtb and (_is_number(value) or value is None):
            out[twin] = xtb[key]
    return out


def _xtb_twins(record: Mapping) -> dict:
    out = {}
    for key, value in record.items():
        out[key] = value
        twin = xtb_key(key)
        if twin and key not in _NOT_COMPUTED and _is_number(value):
            out[twin] = value
    return out


def _ranking_value(task: str, record: dict):
    for key in _RANKING_KEYS.get(task, ()):
        if _is_number(record.get(key)):
            return float(record[key])
    return None


def select_for_refinement(task: str, finished_groups: list[list[dict]], top_k: int | None = None,
                          window_kcal_mol: float | None = None) -> set[tuple[int, int]]:
    """(group, request) indices to refine: all, or the top-k / those within a window of the best.

    ``sites`` and ``ladder`` rank within each input (one ranking per
    substrate); the other tasks rank all inputs together.  With both
    criteria a request must meet both.  Records with an error are never
    selected; a task without a ranking value (thermo) refines everything.
    """
    ok = [(g, i) for g, records in enumerate(finished_groups) for i, r in enumerate(records) if not r.get("error")]
    if top_k is None and window_kcal_mol is None:
        return set(ok)
    if top_k is not None and int(top_k) < 1:
        raise RefineError(f"refine_top_k {top_k}: give 1 or more")
    if window_kcal_mol is not None and float(window_kcal_mol) < 0:
        raise RefineError(f"refine_window_kcal_mol {window_kcal_mol}: give 0 or more")
    per_input = task in ("sites", "ladder")
    rankings: dict[int, list[tuple[float, tuple[int, int]]]] = {}
    chosen = set()
    for g, i in ok:
        value = _ranking_value(task, finished_groups[g][i])
        if value is None:
            chosen.add((g, i))
            continue
        rankings.setdefault(g if per_input else 0, []).append((value, (g, i)))
    for ranking in rankings.values():
        ranking.sort(key=lambda item: item[0])
        best = ranking[0][0]
        for position, (value, index) in enumerate(ranking):
            if top_k is not None and position >= int(top_k):
                continue
            if window_kcal_mol is not None and value - best > float(window_kcal_mol):
                continue
            chosen.add(index)
    return chosen


def refine_note(level: Level, settings: Settings, geometry: Level | None = None) -> str:
    structures = (f"on {geometry.name} geometries (gas phase, started from the GFN2-xTB ones)" if geometry else
                  f"on the GFN2-xTB geometries ({settings.level})")
    composite = "DFT//DFT" if geometry else "DFT//xTB"
    return (f"electronic energies from {level.name} single points (density fitting) {structures}; ZPE, thermal "
            f"corrections and entropies from the GFN2-xTB Hessian ({settings.level}): the {composite} composite "
            f"{refined_level_name(level, settings.level, settings, geometry)}; solvation: "
            f"{solvation_label(level, settings)}; GFN2-xTB values kept in the *_xtb_* keys")


def refine_task_records(task: str, groups: list, finished_groups: list[list[dict]], results: dict,
                        settings: Settings, options: dict, *, workers: int = 1, force: bool = False,
                        store: ResultStore | None = None) -> list[list[dict]]:
    """New records for the selected requests, rebuilt from refined species (``_xtb`` twins beside).

    ``groups`` are the prepared requests (:class:`~cationcalc.tasks.records.Prepared`)
    of each input and ``finished_groups`` their GFN2-xTB records, in the same
    order; ``results`` maps each species to its GFN2-xTB result.  Options:
    ``refine`` (level), ``refine_top_k``, ``refine_window_kcal_mol``,
    ``refine_geometry`` (a gas-phase DFT level for the structures: DFT//DFT),
    ``refine_log`` (callable receiving the cost estimate lines).  The
    GFN2-xTB records are not changed.
    """
    lvl, geo = parse_level(options["refine"]), parse_geometry_level(options.get("refine_geometry"))
    selected = select_for_refinement(task, finished_groups, options.get("refine_top_k"),
                                     options.get("refine_window_kcal_mol"))
    needed = list(dict.fromkeys(sp for g, i in sorted(selected) for sp in groups[g][i].needs.values()))
    refined = refine_many({sp: results[sp] for sp in needed}, lvl, settings, force=force,
                          threads=max(1, int(workers or 1)), store=store, log=options.get("refine_log"), geometry=geo)
    return [[record if record.get("error") else
             _refined_record(groups[g][i], record, refined, lvl, settings, geo) if (g, i) in selected else
             _unselected_record(record, lvl, settings)
             for i, record in enumerate(finished)] for g, finished in enumerate(finished_groups)]


def _unselected_record(record: Mapping, level: Level, settings: Settings) -> dict:
    """A request outside the refine_top_k/refine_window selection: GFN2-xTB values, labelled so."""
    rec = _xtb_twins(record)
    rec.update({"refine_level": None, "xtb_level": settings.level,
                "refine_note": f"not refined (outside the refine_top_k/refine_window_kcal_mol "
                               f"selection): GFN2-xTB values ({settings.level})"})
    rec["warnings"] = list(rec.get("warnings", [])) + [
        f"not refined at {level.name}: this value is GFN2-xTB ({settings.level})"]
    return rec


def _refined_record(prepared, record: Mapping, refined: "_Refined", level: Level, settings: Settings,
                    geometry: Level | None = None) -> dict:
    """The record of one request rebuilt from its refined species, or its failure (GFN2-xTB twins kept)."""
    from cationcalc.execution.executors import SpeciesFailure

    res = {role: refined[sp] for role, sp in prepared.needs.items()}
    failed = [f"{role} {sp.smiles}: {res[role].message}" for role, sp in prepared.needs.items()
              if isinstance(res[role], SpeciesFailure)]
    note = refine_note(level, settings, geometry)
    if failed:
        rec = {**prepared.base, "error": "; ".join(failed), "warnings": list(record.get("warnings", [])),
               "rearranged": record.get("rearranged", False)}
        rec.update({xtb_key(k): v for k, v in record.items()
                    if xtb_key(k) and k not in _NOT_COMPUTED and _is_number(v)})
        rec.update({"refine_level": level.name, "xtb_level": settings.level, "refine_note": note})
        return rec
    rec = merge_records(prepared.finish(res), record)
    infos = [refined.info[sp] for sp in dict.fromkeys(prepared.needs.values()) if sp in refined.info]
    rec.update({"level": refined_level_name(level, settings.level, settings, geometry), "xtb_level": settings.level,
                "refine_level": level.name, "refine_solvation": solvation_label(level, settings),
                "refine_note": note, "refine_seconds": round(sum(x.seconds for x in infos), 2)})
    return rec


def mark_unrefined(records: list[Mapping], xtb_level: str) -> list[Mapping]:
    """New records saying the refinement was interrupted: the values are GFN2-xTB (failures as they were)."""
    return [r if r.get("error") else {**r, "refine_level": None, "warnings": list(r.get("warnings", [])) + [
        f"DFT refinement interrupted: this value is {xtb_level}"]} for r in records]


def relabel_uncertainties(records: list[Mapping], calibrated: bool = False) -> list[Mapping]:
    """New records without the GFN2-xTB error bars on refined values (they describe GFN2-xTB, not DFT)."""
    return [r if not r.get("refine_level") or r.get("error") else _relabelled(r, calibrated) for r in records]


def _relabelled(record: Mapping, calibrated: bool) -> dict:
    out = {k: v for k, v in record.items() if not k.endswith("_uncertainty_kcal_mol")}
    mae = BENCHMARK_MAE_KCAL_MOL.get(out["refine_level"])
    out["uncertainty_basis"] = (f"no per-value error bars at {out['refine_level']} (the GFN2-xTB ones do not apply)"
                                + (f"; its mean absolute error on the gas-phase HIA benchmark is {mae} kcal/mol "
                                   "with the class anchor (benchmarks/results/class_anchors.md)" if mae is not None else ""))
    if calibrated:
        out["calibrated"] = False
        out["calibration_note"] = "the calibration line is fitted to GFN2-xTB: refined values are not calibrated"
    return out


class _Refined(dict):
    """dict key → refined result, with ``info`` key → :class:`Refinement` for those computed here."""

    def __init__(self):
        super().__init__()
        self.info: dict = {}


__all__ = ["refine_task_records", "select_for_refinement", "merge_records", "xtb_key", "relabel_uncertainties",
           "mark_unrefined",
           "DEFAULT_LEVEL", "MAX_BASIS_FUNCTIONS", "Level", "RefineError", "Refinement", "CostEstimate",
           "parse_level", "offered_levels", "estimate_cost", "refine_result", "refine_species", "refine_many",
           "refined_key", "solvation_label", "refined_level_name"]
