"""Density-functional single points with PySCF (the DFT refinement tier).

One call computes the electronic energy of one structure at one DFT level:
a functional (with D3(BJ) or D4 dispersion through ``pyscf-dispersion``),
a basis set, density fitting (the def2 JK-fitting auxiliary basis PySCF picks
for def2 orbital bases), and optionally an implicit solvent in PySCF itself
(C-PCM, or SMD for the solvents in PySCF's SMD table).  Closed-shell singlets
run restricted (RKS), everything else unrestricted (UKS) with PySCF's
``spin`` = 2S = multiplicity − 1.

Safeguards:

* the charge/multiplicity combination is checked against the electron count
  before PySCF sees it (:class:`ChargeMultiplicityError`, one line);
* the SCF (DIIS) is checked for convergence; a failed SCF is continued with
  the second-order (Newton, augmented-Hessian) solver from its last orbitals;
  if that fails too, :class:`DFTConvergenceError` says so.  The result names
  the route that converged (``scf_route``);
* without ``pyscf``/``pyscf-dispersion`` installed, :func:`require_pyscf`
  raises :class:`DFTUnavailable` with the install command.

Units: positions in Å at this boundary; energies in Hartree.

Example
-------
>>> from cationcalc.engines.pyscf_engine import dft_single_point
>>> r = dft_single_point([1, 1], [[0, 0, 0], [0, 0, 0.74]], charge=0, multiplicity=1,
...                      xc="b3lyp-d3bj", basis="def2-svp")
>>> round(r.energy_hartree, 2), r.n_basis, r.scf_route
(-1.17, 10, 'DIIS')
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from typing import TYPE_CHECKING, Sequence

import numpy as np
from numpy.typing import ArrayLike

from cationcalc.engines.base import EngineError

if TYPE_CHECKING:  # pragma: no cover
    import pyscf.gto

    from cationcalc.engines.base import EngineResult

INSTALL_HINT = "pip install 'cationcalc[dft]'"

#: solvent models PySCF computes here
PYSCF_SOLVENT_MODELS = ("C-PCM", "SMD")

#: cationcalc's canonical solvent names (engines/solvents.py) → names in PySCF's SMD table;
#: solvents missing here (furan, phenol, wet octanol) have no entry in that table
SMD_NAMES: dict[str, str] = {
    "acetone": "acetone",
    "acetonitrile": "acetonitrile",
    "aniline": "aniline",
    "benzaldehyde": "benzaldehyde",
    "benzene": "benzene",
    "dichloromethane": "dichloromethane",
    "chloroform": "chloroform",
    "carbon disulfide": "carbon disulfide",
    "dioxane": "1,4-dioxane",
    "dmf": "N,N-dimethylformamide",
    "dmso": "dimethylsulfoxide",
    "diethyl ether": "diethylether",
    "ethanol": "ethanol",
    "ethyl acetate": "ethylethanoate",
    "hexadecane": "n-hexadecane",
    "hexane": "n-hexane",
    "methanol": "methanol",
    "nitromethane": "nitromethane",
    "octanol": "1-octanol",
    "toluene": "toluene",
    "thf": "tetrahydrofuran",
    "water": "water",
}


class DFTUnavailable(EngineError):
    """PySCF or its dispersion extra is not installed."""


class ChargeMultiplicityError(EngineError, ValueError):
    """The charge and multiplicity cannot both hold for this set of atoms."""


class DFTConvergenceError(EngineError):
    """The DFT SCF did not converge, not even with the second-order solver."""


def require_pyscf() -> None:
    """Raise :class:`DFTUnavailable` (with the install command) unless PySCF and pyscf-dispersion import."""
    try:
        import pyscf  # noqa: F401
    except ImportError:
        raise DFTUnavailable(f"the DFT refinement needs PySCF: {INSTALL_HINT}") from None
    try:
        import pyscf.dispersion  # noqa: F401
    except ImportError:
        raise DFTUnavailable(f"the DFT refinement needs pyscf-dispersion for D3(BJ)/D4: {INSTALL_HINT}") from None


def spin_of(numbers: Sequence[int], charge: int, multiplicity: int, what: str = "this species") -> int:
    """PySCF's ``spin`` (2S = N_alpha − N_beta = multiplicity − 1), after checking it fits the electron count."""
    n_electrons = int(sum(int(z) for z in numbers)) - int(charge)
    multiplicity = int(multiplicity)
    if multiplicity < 1:
        raise ChargeMultiplicityError(f"{what}: multiplicity {multiplicity} is impossible (1 = singlet, 2 = doublet, …)")
    if n_electrons < 0:
        raise ChargeMultiplicityError(f"{what}: charge {charge:+d} leaves {n_electrons} electrons")
    spin = multiplicity - 1
    if spin > n_electrons or (n_electrons - spin) % 2:
        parity = "even" if n_electrons % 2 == 0 else "odd"
        allowed = "1 (singlet), 3 (triplet), …" if parity == "even" else "2 (doublet), 4 (quartet), …"
        raise ChargeMultiplicityError(
            f"{what}: charge {charge:+d} with multiplicity {multiplicity} is impossible: {n_electrons} electrons "
            f"({parity}) need multiplicity {allowed}; fix the charge or the multiplicity")
    return spin


def smd_name(solvent: str) -> str:
    """PySCF SMD-table name of a canonical cationcalc solvent; ValueError when the table has none."""
    if solvent not in SMD_NAMES:
        raise ValueError(f"solvent {solvent!r} has no entry in PySCF's SMD/C-PCM solvent table; use the ALPB "
                         f"solvation of GFN2-xTB (solvent model ALPB) or one of: {', '.join(sorted(SMD_NAMES))}")
    return SMD_NAMES[solvent]


def dielectric_constant(solvent: str) -> float:
    """Static dielectric constant of a solvent from PySCF's SMD descriptor table."""
    from pyscf.solvent.smd import solvent_db

    return float(solvent_db[smd_name(solvent)][5])


@dataclass(frozen=True)
class DFTResult:
    """One DFT single point."""

    energy_hartree: float
    #: dispersion energy contained in energy_hartree (0 without a dispersion correction)
    dispersion_hartree: float
    n_basis: int
    n_electrons: int
    spin: int
    restricted: bool
    #: "DIIS", or "DIIS, then second-order (Newton)" when the fallback was needed
    scf_route: str
    scf_cycles: int
    seconds: float
    #: ⟨S²⟩ of an unrestricted solution (None for RKS)
    s_squared: float | None = None
    #: "C-PCM(water)", "SMD(water)" or None (gas phase)
    solvent_model: str | None = None


def build_molecule(numbers: Sequence[int], positions_angstrom: ArrayLike, *, charge: int, multiplicity: int, basis: str,
                   what: str = "this species", max_memory_mb: float | None = None) -> "pyscf.gto.Mole":
    """A built ``pyscf.gto.Mole`` (Å input, Cartesian coordinates, spherical basis)."""
    require_pyscf()
    from pyscf import gto

    numbers = [int(z) for z in numbers]
    positions = np.asarray(positions_angstrom, dtype=float).reshape(len(numbers), 3)
    spin = spin_of(numbers, charge, multiplicity, what)
    mol = gto.Mole()
    mol.atom = [(z, tuple(map(float, xyz))) for z, xyz in zip(numbers, positions)]
    mol.unit = "Angstrom"
    mol.basis = basis
    mol.charge = int(charge)
    mol.spin = spin
    mol.verbose = 0
    if max_memory_mb is not None:
        mol.max_memory = float(max_memory_mb)
    mol.build()
    return mol


def count_basis_functions(numbers: Sequence[int], basis: str) -> int:
    """Number of (spherical) basis functions of a set of atoms in a basis; cheap (no integrals)."""
    require_pyscf()
    from pyscf import gto

    atoms = [(int(z), (0.0, 0.0, 2.0 * i)) for i, z in enumerate(numbers)]
    spin = sum(int(z) for z in numbers) % 2  # any consistent spin: the count does not depend on it
    mol = gto.M(atom=atoms, basis=basis, spin=spin, verbose=0, unit="Angstrom")
    return int(mol.nao_nr())


def dft_single_point(numbers: Sequence[int], positions_angstrom: ArrayLike, *, charge: int, multiplicity: int, xc: str,
                     basis: str, grid_level: int = 3, solvent: str | None = None, solvent_model: str | None = None,
                     max_cycle: int = 100, newton_max_cycle: int = 50, conv_tol: float = 1e-9,
                     threads: int | None = None, max_memory_mb: float | None = None,
                     what: str = "this species") -> DFTResult:
    """Energy (Hartree) of one structure at one DFT level with density fitting.

    ``xc`` is a PySCF functional string; a ``-d3bj``/``-d4`` suffix adds the
    dispersion correction (``b3lyp-d3bj``, ``wb97x-d3bj``, ``r2scan-d4``).
    ``solvent`` (canonical name) with ``solvent_model`` "C-PCM" or "SMD"
    adds implicit solvation in PySCF; ``solvent_model=None`` is gas phase.
    ``threads`` overrides PySCF's OpenMP thread count for this call only.
    """
    return _converged_dft(numbers, positions_angstrom, charge=charge, multiplicity=multiplicity, xc=xc, basis=basis,
                          grid_level=grid_level, solvent=solvent, solvent_model=solvent_model, max_cycle=max_cycle,
                          newton_max_cycle=newton_max_cycle, conv_tol=conv_tol, threads=threads,
                          max_memory_mb=max_memory_mb, what=what)[0]


def dft_energy_and_gradient(numbers: Sequence[int], positions_angstrom: ArrayLike, *, charge: int, multiplicity: int,
                            xc: str, basis: str, grid_level: int = 3, threads: int | None = None,
                            max_memory_mb: float | None = None, density_guess: np.ndarray | None = None,
                            what: str = "this species") -> tuple[DFTResult, np.ndarray, np.ndarray]:
    """Gas-phase energy, analytic nuclear gradient (Hartree/Bohr, dispersion included) and the converged
    density matrix (a guess for the next, nearby geometry) of one structure."""
    from pyscf import lib

    result, final = _converged_dft(numbers, positions_angstrom, charge=charge, multiplicity=multiplicity, xc=xc,
                                   basis=basis, grid_level=grid_level, threads=threads, max_memory_mb=max_memory_mb,
                                   density_guess=density_guess, what=what)
    context = lib.with_omp_threads(int(threads)) if threads else _nullcontext()
    with context:
        gradient = np.asarray(final.nuc_grad_method().kernel(), dtype=float)
    if not np.all(np.isfinite(gradient)):
        raise EngineError(f"{what}: PySCF returned a non-finite gradient")
    return result, gradient, np.asarray(final.make_rdm1())


def _converged_dft(numbers: Sequence[int], positions_angstrom: ArrayLike, *, charge: int, multiplicity: int, xc: str,
                   basis: str, grid_level: int = 3, solvent: str | None = None, solvent_model: str | None = None,
                   max_cycle: int = 100, newton_max_cycle: int = 50, conv_tol: float = 1e-9,
                   threads: int | None = None, max_memory_mb: float | None = None,
                   density_guess: np.ndarray | None = None, what: str = "this species"):
    """The :class:`DFTResult` and the converged PySCF SCF object of one structure."""
    require_pyscf()
    from pyscf import lib

    start = time.perf_counter()
    mol = build_molecule(numbers, positions_angstrom, charge=charge, multiplicity=multiplicity, basis=basis,
                         what=what, max_memory_mb=max_memory_mb)
    restricted = mol.spin == 0
    mf = _kohn_sham(mol, xc=xc, grid_level=grid_level, conv_tol=conv_tol, max_cycle=max_cycle)
    mf, label = _with_solvent(mf, solvent, solvent_model)
    cycles = {"n": 0}

    def count(envs):
        cycles["n"] += 1

    mf.callback = count
    if density_guess is not None:
        mf.init_guess = "_given"
        mf.get_init_guess = lambda *args, **kwargs: density_guess
    context = lib.with_omp_threads(int(threads)) if threads else _nullcontext()
    with context:
        energy, final, route = _converged_scf(mf, count, xc=xc, basis=basis, max_cycle=max_cycle,
                                              newton_max_cycle=newton_max_cycle, conv_tol=conv_tol, what=what)
        e_disp = _dispersion_energy(final)
    energy = float(energy)
    if not np.isfinite(energy):
        raise EngineError(f"{what}: PySCF returned a non-finite energy")
    s2 = None if restricted else float(final.spin_square()[0])
    result = DFTResult(energy_hartree=energy, dispersion_hartree=e_disp, n_basis=int(mol.nao_nr()),
                       n_electrons=int(mol.nelectron), spin=int(mol.spin), restricted=restricted, scf_route=route,
                       scf_cycles=cycles["n"], seconds=time.perf_counter() - start, s_squared=s2,
                       solvent_model=label)
    return result, final


class DFTEngine:
    """Gas-phase DFT energies and forces behind the engine protocol (:class:`~cationcalc.engines.base.Engine`),
    so that ASE's optimisers and the numerical Hessian run at a DFT level.

    ``method`` is the level as the trade writes it (``B3LYP-D3BJ/def2-SVP``); ``xc`` and ``basis`` are PySCF's
    strings.  The converged density of the last call seeds the next call on the same atoms.  It computes no
    partial charges (zeros) and no bond orders.
    """

    name = "pyscf"
    solvent_model = "gas phase only"

    def __init__(self, method: str, xc: str, basis: str, *, grid_level: int = 3, threads: int | None = None,
                 max_memory_mb: float | None = None):
        from cationcalc.engines.base import EngineCounters

        self.method, self.xc, self.basis = method, xc, basis
        self.grid_level, self.threads, self.max_memory_mb = int(grid_level), threads, max_memory_mb
        self.counters = EngineCounters()
        self._guess: tuple[tuple, np.ndarray] | None = None

    def solvents(self) -> tuple[str, ...]:
        return ()

    def compute(self, numbers: Sequence[int], positions_angstrom: np.ndarray, *, charge: int, multiplicity: int,
                solvent: str | None) -> "EngineResult":
        from cationcalc.chem import units
        from cationcalc.engines.base import CallTimer, EngineResult, UnknownSolventError, check_finite

        if solvent is not None:
            raise UnknownSolventError(f"DFT forces here are gas phase only (asked for {solvent!r})")
        key = (tuple(int(z) for z in numbers), int(charge), int(multiplicity))
        guess = self._guess[1] if self._guess is not None and self._guess[0] == key else None
        with CallTimer(self.counters):
            dft, gradient, density = dft_energy_and_gradient(
                numbers, positions_angstrom, charge=charge, multiplicity=multiplicity, xc=self.xc, basis=self.basis,
                grid_level=self.grid_level, threads=self.threads, max_memory_mb=self.max_memory_mb,
                density_guess=guess, what=f"{self.method} forces")
        self._guess = (key, density)
        forces = -gradient * units.HARTREE_EV / units.BOHR_ANGSTROM
        charges = np.zeros(len(key[0]))
        return check_finite(EngineResult(dft.energy_hartree * units.HARTREE_EV, forces, charges), self.method)


def _kohn_sham(mol, *, xc: str, grid_level: int, conv_tol: float, max_cycle: int):
    """Restricted (closed shell) or unrestricted Kohn–Sham object with density fitting."""
    from pyscf import dft

    mf = (dft.RKS(mol) if mol.spin == 0 else dft.UKS(mol))
    mf.xc = xc
    mf.grids.level = int(grid_level)
    mf.conv_tol = float(conv_tol)
    mf.max_cycle = int(max_cycle)
    return mf.density_fit()


def _with_solvent(mf, solvent: str | None, solvent_model: str | None):
    """``mf`` wrapped in the implicit solvent model, and its label (None in the gas phase)."""
    if solvent_model is None:
        return mf, None
    if solvent is None:
        raise ValueError(f"solvent model {solvent_model} needs a solvent")
    if solvent_model == "C-PCM":
        mf = mf.PCM()
        mf.with_solvent.method = "C-PCM"
        mf.with_solvent.eps = dielectric_constant(solvent)
    elif solvent_model == "SMD":
        mf = mf.SMD()
        mf.with_solvent.solvent = smd_name(solvent)
    else:
        raise ValueError(f"solvent model {solvent_model!r}: PySCF solvent models here are "
                         + ", ".join(PYSCF_SOLVENT_MODELS))
    return mf, f"{solvent_model}({solvent})"


def _converged_scf(mf, count, *, xc: str, basis: str, max_cycle: int, newton_max_cycle: int, conv_tol: float,
                   what: str):
    """Run DIIS, then second-order (Newton) if DIIS did not converge: (energy, final SCF object, route).

    PySCF failures become :class:`EngineError` (or :class:`DFTUnavailable` for a missing dispersion
    correction); no convergence either way raises :class:`DFTConvergenceError`.
    """
    try:
        energy = mf.kernel()
        if mf.converged:
            return energy, mf, "DIIS"
        newton = mf.newton()
        newton.max_cycle = int(newton_max_cycle)
        newton.conv_tol = float(conv_tol)
        newton.callback = count
        energy = newton.kernel(mf.mo_coeff, mf.mo_occ)
        if not newton.converged:
            raise DFTConvergenceError(
                f"{what}: the DFT SCF ({xc}/{basis}) did not converge in {max_cycle} DIIS cycles nor in "
                f"{newton_max_cycle} second-order (Newton) cycles; check the structure, charge and "
                "multiplicity")
        return energy, newton, "DIIS, then second-order (Newton)"
    except (RuntimeError, np.linalg.LinAlgError) as exc:
        if isinstance(exc, EngineError):
            raise
        if "dispersion" in str(exc).lower():
            raise DFTUnavailable(f"dispersion correction unavailable ({exc}): {INSTALL_HINT}") from None
        raise EngineError(f"{what}: PySCF failed: {str(exc).splitlines()[0] if str(exc) else type(exc).__name__}"
                          ) from None


def _dispersion_energy(final) -> float:
    """The dispersion correction (Hartree) of the converged SCF; 0 without one."""
    if not hasattr(final, "get_dispersion"):
        return 0.0
    try:
        return float(final.get_dispersion())
    except Exception:  # pragma: no cover - a functional without dispersion parameters
        return 0.0


class _nullcontext:
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


__all__ = ["dft_single_point", "dft_energy_and_gradient", "DFTEngine", "DFTResult", "DFTUnavailable", "DFTConvergenceError", "ChargeMultiplicityError",
           "require_pyscf", "spin_of", "count_basis_functions", "build_molecule", "SMD_NAMES", "smd_name",
           "dielectric_constant", "INSTALL_HINT", "PYSCF_SOLVENT_MODELS"]
