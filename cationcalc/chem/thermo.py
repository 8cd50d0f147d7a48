"""Harmonic vibrational analysis and ideal-gas thermochemistry (pure NumPy).

What this module does, in the order a calculation uses it:

1. :func:`vibrational_analysis` turns a Cartesian Hessian (eV/Å², as ASE
   gives it) into harmonic wavenumbers and normal modes, after projecting out
   the rigid-body translations and rotations (Eckart conditions).
2. :func:`thermochemistry` adds translation, rotation, vibration and the
   electronic (spin) degeneracy for an ideal gas at a given temperature and
   pressure, with Grimme's quasi-RRHO treatment of soft modes by default.
3. :func:`standard_state_correction_kcal_mol` moves a free energy from the
   1 atm gas standard state to 1 mol/L; :func:`boltzmann_ensemble` combines
   conformers into one free energy.

Conventions
-----------
* Imaginary frequencies are reported as **negative** wavenumbers.
  :func:`thermochemistry` leaves them (and exact zeros) out of every
  vibrational sum; it counts them in ``n_imaginary_ignored`` and the caller
  decides whether to warn.
* "Corrections" are relative to the electronic energy E_el at the geometry:
  thermal energy U − E_el includes the zero-point energy, the enthalpy
  correction is U + RT, the Gibbs correction is H − TS.
* Quasi-RRHO (S. Grimme, Chem. Eur. J. 18, 9955 (2012)) damps only the
  entropy by default; the enthalpy damping of Li, Gilbert, Head-Gordon et
  al. (J. Phys. Chem. C 119, 1840 (2015)) is available with
  ``QuasiRRHO(damp_enthalpy=True)``.

Example
-------
A harmonic diatomic built from one spring (k = 100 eV/Å² between C and O):

>>> import numpy as np
>>> from cationcalc.chem import thermo
>>> positions = np.array([[0.0, 0.0, 0.0], [0.0, 0.0, 1.128]])
>>> masses = np.array([12.0, 15.995])
>>> k = 100.0
>>> block = k * np.diag([0.0, 0.0, 1.0])
>>> hessian = np.block([[block, -block], [-block, block]])
>>> modes = thermo.vibrational_analysis(hessian, masses, positions)
>>> modes.is_linear, modes.frequencies_cm1.shape
(True, (1,))
>>> round(float(modes.frequencies_cm1[0]))
1992
>>> result = thermo.thermochemistry(modes.frequencies_cm1, masses, positions,
...                                 symmetry_number=1)
>>> round(result.entropy_J_mol_K, 1)
197.5
>>> round(thermo.standard_state_correction_kcal_mol(), 2)
1.89
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from cationcalc.chem.units import (
    AMU_KG,
    AVOGADRO,
    BOLTZMANN_J_K,
    EV_TO_J_MOL,
    GAS_CONSTANT_J_MOL_K,
    J_TO_KCAL,
    PLANCK_J_S,
    SPEED_OF_LIGHT_M_S,
)

#: 1 eV/(Å² amu) as an angular frequency squared, s⁻²
_EV_PER_A2_AMU_TO_S2 = (EV_TO_J_MOL / AVOGADRO) / (1e-20 * AMU_KG)
#: 1 cm⁻¹ as a frequency, s⁻¹
_CM1_TO_HZ = 100.0 * SPEED_OF_LIGHT_M_S
#: 1 amu Å² in kg m²
_AMU_A2_TO_KG_M2 = AMU_KG * 1e-20
#: default relative threshold smallest/largest principal moment for "linear"
LINEAR_TOLERANCE = 1e-3


# ----------------------------------------------------------------------------
# geometry helpers
# ----------------------------------------------------------------------------

def _as_positions(positions_angstrom) -> np.ndarray:
    positions = np.asarray(positions_angstrom, dtype=float).reshape(-1, 3)
    return positions


def _as_masses(masses_amu, n_atoms: int) -> np.ndarray:
    masses = np.asarray(masses_amu, dtype=float).reshape(-1)
    if masses.shape != (n_atoms,):
        raise ValueError(f"expected {n_atoms} masses, got {masses.shape[0]}")
    if np.any(masses <= 0.0):
        raise ValueError("masses must be positive")
    return masses


def centre_of_mass_angstrom(positions_angstrom: ArrayLike, masses_amu: ArrayLike) -> np.ndarray:
    """Centre of mass (Å)."""
    positions = _as_positions(positions_angstrom)
    masses = _as_masses(masses_amu, len(positions))
    return masses @ positions / masses.sum()


def inertia_tensor_amu_A2(positions_angstrom: ArrayLike, masses_amu: ArrayLike) -> np.ndarray:
    """3×3 inertia tensor about the centre of mass (amu Å²)."""
    positions = _as_positions(positions_angstrom)
    masses = _as_masses(masses_amu, len(positions))
    r = positions - masses @ positions / masses.sum()
    r2 = np.einsum("ij,ij->i", r, r)
    return np.eye(3) * (masses @ r2) - np.einsum("i,ij,ik->jk", masses, r, r)


def moments_of_inertia_amu_A2(positions_angstrom: ArrayLike, masses_amu: ArrayLike) -> np.ndarray:
    """Principal moments of inertia (amu Å²), ascending.

    >>> moments_of_inertia_amu_A2([[0, 0, 0], [0, 0, 1.0]], [1.0, 1.0]).round(3)
    array([0. , 0.5, 0.5])
    """
    moments = np.linalg.eigvalsh(inertia_tensor_amu_A2(positions_angstrom, masses_amu))
    return np.clip(moments, 0.0, None)


def is_linear(positions_angstrom: ArrayLike, masses_amu: ArrayLike, tol: float = LINEAR_TOLERANCE) -> bool:
    """True for a linear molecule: smallest/largest principal moment < ``tol``.

    A single atom is not linear (it has no rotations at all).
    """
    positions = _as_positions(positions_angstrom)
    if len(positions) < 2:
        return False
    moments = moments_of_inertia_amu_A2(positions, masses_amu)
    if moments[2] <= 0.0:
        return False
    return bool(moments[0] / moments[2] < tol)


# ----------------------------------------------------------------------------
# vibrational analysis
# ----------------------------------------------------------------------------

@dataclass(frozen=True)
class VibrationalModes:
    """Result of :func:`vibrational_analysis`.

    ``frequencies_cm1`` are ascending harmonic wavenumbers, imaginary ones
    negative. ``modes[k]`` is the Cartesian displacement pattern of mode k,
    shape (n_atoms, 3), normalised to unit length over all 3N components.
    """

    frequencies_cm1: np.ndarray
    modes: np.ndarray
    is_linear: bool

    @property
    def n_imaginary(self) -> int:
        return int(np.count_nonzero(self.frequencies_cm1 < 0.0))


def rigid_body_vectors(positions_angstrom: ArrayLike, masses_amu: ArrayLike, linear: bool | None = None) -> np.ndarray:
    """Orthonormal mass-weighted translation/rotation vectors, shape (3N, n_rigid).

    n_rigid is 3 for an atom, 5 for a linear molecule, 6 otherwise. Built from
    centre-of-mass-centred positions: translations sqrt(m_i)·e_α, rotations
    sqrt(m_i)·(e_α × r_i), orthonormalised by SVD (the leading singular
    vectors span the rigid-body space, also for nearly linear molecules).
    """
    positions = _as_positions(positions_angstrom)
    n_atoms = len(positions)
    masses = _as_masses(masses_amu, n_atoms)
    if linear is None:
        linear = is_linear(positions, masses)
    n_rigid = 3 if n_atoms == 1 else (5 if linear else 6)
    r = positions - masses @ positions / masses.sum()
    sqrt_m = np.sqrt(masses)
    vectors = np.zeros((n_atoms, 3, 6))
    for axis in range(3):
        unit = np.zeros(3)
        unit[axis] = 1.0
        vectors[:, axis, axis] = sqrt_m
        vectors[:, :, 3 + axis] = sqrt_m[:, None] * np.cross(unit, r)
    vectors = vectors.reshape(3 * n_atoms, 6)
    left, _, _ = np.linalg.svd(vectors, full_matrices=True)
    return left[:, :n_rigid]


def _eigenvalue_to_cm1(eigenvalues_ev_A2_amu: np.ndarray) -> np.ndarray:
    """Mass-weighted Hessian eigenvalues → signed wavenumbers (cm⁻¹)."""
    omega = np.sqrt(np.abs(eigenvalues_ev_A2_amu) * _EV_PER_A2_AMU_TO_S2)
    return np.sign(eigenvalues_ev_A2_amu) * omega / (2.0 * np.pi * _CM1_TO_HZ)


def vibrational_analysis(
    hessian_ev_per_A2: ArrayLike,
    masses_amu: ArrayLike,
    positions_angstrom: ArrayLike,
    linear_tolerance: float = LINEAR_TOLERANCE,
) -> VibrationalModes:
    """Harmonic frequencies and normal modes with rigid-body motion removed.

    Steps: symmetrise the Hessian, mass-weight it, build an orthonormal basis
    of the vibrational space (the orthogonal complement of the Eckart
    translation/rotation vectors), diagonalise the Hessian inside that space
    and convert eigenvalues to wavenumbers. Because the rigid-body space is
    removed as a whole, exactly 3N−6 (linear: 3N−5; atom: 0) modes come back,
    however contaminated the rigid-body block of a numerical Hessian is.

    Negative curvature gives a negative wavenumber (an "imaginary" mode).
    """
    positions = _as_positions(positions_angstrom)
    n_atoms = len(positions)
    masses = _as_masses(masses_amu, n_atoms)
    hessian = np.asarray(hessian_ev_per_A2, dtype=float)
    if hessian.shape != (3 * n_atoms, 3 * n_atoms):
        hessian = hessian.reshape(3 * n_atoms, 3 * n_atoms)
    hessian = 0.5 * (hessian + hessian.T)
    linear = is_linear(positions, masses, linear_tolerance)

    inverse_sqrt_m = np.repeat(1.0 / np.sqrt(masses), 3)
    mass_weighted = hessian * np.outer(inverse_sqrt_m, inverse_sqrt_m)

    rigid = rigid_body_vectors(positions, masses, linear)
    full_basis, _, _ = np.linalg.svd(rigid, full_matrices=True)
    vibrational_basis = full_basis[:, rigid.shape[1]:]
    n_modes = vibrational_basis.shape[1]
    if n_modes == 0:
        return VibrationalModes(np.zeros(0), np.zeros((0, n_atoms, 3)), linear)

    internal_hessian = vibrational_basis.T @ mass_weighted @ vibrational_basis
    eigenvalues, eigenvectors = np.linalg.eigh(0.5 * (internal_hessian + internal_hessian.T))
    frequencies_cm1 = _eigenvalue_to_cm1(eigenvalues)

    cartesian = (vibrational_basis @ eigenvectors) * inverse_sqrt_m[:, None]
    cartesian /= np.linalg.norm(cartesian, axis=0)
    modes = cartesian.T.reshape(n_modes, n_atoms, 3)
    order = np.argsort(frequencies_cm1, kind="stable")
    return VibrationalModes(frequencies_cm1[order], modes[order], linear)


# ----------------------------------------------------------------------------
# quasi-RRHO
# ----------------------------------------------------------------------------

@dataclass(frozen=True)
class QuasiRRHO:
    """Grimme's quasi-RRHO settings (Chem. Eur. J. 18, 9955 (2012)).

    Each real mode of wavenumber ν gets the weight w = 1/(1 + (ν0/ν)^α) with
    ν0 = ``cutoff_cm1``; its entropy is w·S_harmonic + (1 − w)·S_free_rotor,
    where the free rotor has the moment μ' = μ·B_av/(μ + B_av),
    μ = h/(8π² ν c) and B_av = ``average_moment_kg_m2``.

    ``damp_enthalpy=False`` (the default, as in Grimme's paper) keeps the
    harmonic energy. With ``True`` each mode's vibrational energy
    (zero-point plus thermal) becomes w·E_harmonic + (1 − w)·RT/2, after
    Li, Gilbert, Head-Gordon et al., J. Phys. Chem. C 119, 1840 (2015).
    """

    cutoff_cm1: float = 100.0
    alpha: float = 4.0
    average_moment_kg_m2: float = 1e-44
    damp_enthalpy: bool = False

    def weights(self, frequencies_cm1: ArrayLike) -> np.ndarray:
        """Damping weights w(ν) for positive wavenumbers."""
        nu = np.asarray(frequencies_cm1, dtype=float)
        return 1.0 / (1.0 + (self.cutoff_cm1 / nu) ** self.alpha)


def harmonic_entropy_J_mol_K(frequencies_cm1: ArrayLike, temperature_k: float) -> np.ndarray:
    """Per-mode harmonic-oscillator entropy (J/mol/K) for positive wavenumbers."""
    nu = np.asarray(frequencies_cm1, dtype=float)
    x = PLANCK_J_S * _CM1_TO_HZ * nu / (BOLTZMANN_J_K * temperature_k)
    return GAS_CONSTANT_J_MOL_K * (x / np.expm1(x) - np.log(-np.expm1(-x)))


def harmonic_energy_J_mol(frequencies_cm1: ArrayLike, temperature_k: float) -> tuple[np.ndarray, np.ndarray]:
    """Per-mode (zero-point, thermal) harmonic energies (J/mol)."""
    nu = np.asarray(frequencies_cm1, dtype=float)
    quantum_J_mol = PLANCK_J_S * _CM1_TO_HZ * nu * AVOGADRO
    x = PLANCK_J_S * _CM1_TO_HZ * nu / (BOLTZMANN_J_K * temperature_k)
    return 0.5 * quantum_J_mol, quantum_J_mol / np.expm1(x)


def free_rotor_entropy_J_mol_K(frequencies_cm1: ArrayLike, temperature_k: float,
                               average_moment_kg_m2: float = 1e-44) -> np.ndarray:
    """Per-mode free-rotor entropy of Grimme's quasi-RRHO (J/mol/K)."""
    nu_hz = np.asarray(frequencies_cm1, dtype=float) * _CM1_TO_HZ
    moment = PLANCK_J_S / (8.0 * np.pi**2 * nu_hz)
    effective = moment * average_moment_kg_m2 / (moment + average_moment_kg_m2)
    argument = 8.0 * np.pi**3 * effective * BOLTZMANN_J_K * temperature_k / PLANCK_J_S**2
    return GAS_CONSTANT_J_MOL_K * (0.5 + 0.5 * np.log(argument))


def vibrational_entropy_J_mol_K(frequencies_cm1: ArrayLike, temperature_k: float = 298.15,
                                qrrho: QuasiRRHO | None = QuasiRRHO()) -> float:
    """Total vibrational entropy (J/mol/K) of the positive wavenumbers given.

    Non-positive entries (imaginary modes, zeros) are skipped.
    """
    nu = np.asarray(frequencies_cm1, dtype=float).reshape(-1)
    nu = nu[nu > 0.0]
    harmonic = harmonic_entropy_J_mol_K(nu, temperature_k)
    if qrrho is None:
        return float(harmonic.sum())
    w = qrrho.weights(nu)
    rotor = free_rotor_entropy_J_mol_K(nu, temperature_k, qrrho.average_moment_kg_m2)
    return float(np.sum(w * harmonic + (1.0 - w) * rotor))


# ----------------------------------------------------------------------------
# ideal-gas thermochemistry
# ----------------------------------------------------------------------------

@dataclass(frozen=True)
class Thermochemistry:
    """Ideal-gas thermal corrections relative to the electronic energy."""

    temperature_k: float
    pressure_pa: float
    symmetry_number: int
    spin_multiplicity: int
    is_linear: bool
    zpe_kcal_mol: float
    thermal_energy_kcal_mol: float
    enthalpy_correction_kcal_mol: float
    entropy_J_mol_K: float
    s_translational_J_mol_K: float
    s_rotational_J_mol_K: float
    s_vibrational_J_mol_K: float
    s_electronic_J_mol_K: float
    gibbs_correction_kcal_mol: float
    used_qrrho: bool
    n_imaginary_ignored: int

    @property
    def ts_kcal_mol(self) -> float:
        """T·S in kcal/mol."""
        return self.temperature_k * self.entropy_J_mol_K * J_TO_KCAL


def translational_entropy_J_mol_K(mass_amu: float, temperature_k: float = 298.15,
                                  pressure_pa: float = 101325.0) -> float:
    """Sackur–Tetrode entropy of an ideal gas of particles of this mass."""
    mass_kg = mass_amu * AMU_KG
    kt = BOLTZMANN_J_K * temperature_k
    thermal_wavelength_cubed = (PLANCK_J_S**2 / (2.0 * np.pi * mass_kg * kt)) ** 1.5
    volume_per_particle = kt / pressure_pa
    return GAS_CONSTANT_J_MOL_K * (np.log(volume_per_particle / thermal_wavelength_cubed) + 2.5)


def rotational_entropy_J_mol_K(positions_angstrom: ArrayLike, masses_amu: ArrayLike, symmetry_number: int,
                               temperature_k: float = 298.15,
                               linear: bool | None = None) -> float:
    """Rigid-rotor (classical, high-temperature) rotational entropy.

    Linear: q = T/(σ θ) (θ from the two large moments), S = R(ln q + 1). Nonlinear: q = √π/σ · T^{3/2}/√(θAθBθC),
    S = R(ln q + 3/2). θ = h²/(8π² I k). An atom has none.
    """
    positions = _as_positions(positions_angstrom)
    if len(positions) < 2:
        return 0.0
    if linear is None:
        linear = is_linear(positions, masses_amu)
    moments_kg_m2 = moments_of_inertia_amu_A2(positions, masses_amu) * _AMU_A2_TO_KG_M2
    theta_k = PLANCK_J_S**2 / (8.0 * np.pi**2 * BOLTZMANN_J_K * np.where(moments_kg_m2 > 0, moments_kg_m2, np.inf))
    if linear:
        q = temperature_k / (symmetry_number * np.sqrt(theta_k[1] * theta_k[2]))
        return float(GAS_CONSTANT_J_MOL_K * (np.log(q) + 1.0))
    q = np.sqrt(np.pi) / symmetry_number * temperature_k**1.5 / np.sqrt(np.prod(theta_k))
    return float(GAS_CONSTANT_J_MOL_K * (np.log(q) + 1.5))


def thermochemistry(
    frequencies_cm1: ArrayLike,
    masses_amu: ArrayLike,
    positions_angstrom: ArrayLike,
    symmetry_number: int,
    spin_multiplicity: int = 1,
    temperature_k: float = 298.15,
    pressure_pa: float = 101325.0,
    qrrho: QuasiRRHO | None = QuasiRRHO(),
    imaginary: str = "ignore",
) -> Thermochemistry:
    """Ideal-gas ZPE, U, H, S and G corrections (relative to E_el).

    ``frequencies_cm1`` are the 3N−6 (linear 3N−5, atom none) vibrational
    wavenumbers, e.g. from :func:`vibrational_analysis`; a list of another
    length raises ``ValueError`` (rigid-body modes must not be passed in).
    Negative (imaginary) and zero wavenumbers are left out of all vibrational
    sums; ``imaginary="raise"`` refuses them instead. ``qrrho=None`` gives
    plain RRHO. Translation: Sackur–Tetrode at ``pressure_pa``; rotation:
    rigid rotor with ``symmetry_number``; electronic: R ln(multiplicity).
    """
    _check_options(imaginary, symmetry_number, spin_multiplicity)
    positions = _as_positions(positions_angstrom)
    n_atoms = len(positions)
    masses = _as_masses(masses_amu, n_atoms)
    linear = is_linear(positions, masses)
    nu, n_imaginary = _real_wavenumbers(frequencies_cm1, n_atoms, linear, imaginary)

    rt_J_mol = GAS_CONSTANT_J_MOL_K * temperature_k
    s_trans = translational_entropy_J_mol_K(masses.sum(), temperature_k, pressure_pa)
    e_trans = 1.5 * rt_J_mol
    s_rot = rotational_entropy_J_mol_K(positions, masses, symmetry_number, temperature_k, linear)
    e_rot = 0.0 if n_atoms == 1 else (rt_J_mol if linear else 1.5 * rt_J_mol)
    s_elec = GAS_CONSTANT_J_MOL_K * np.log(spin_multiplicity)
    s_vib = vibrational_entropy_J_mol_K(nu, temperature_k, qrrho)
    zpe, e_vib = _vibrational_energies_J_mol(nu, temperature_k, qrrho)

    thermal_J_mol = e_trans + e_rot + e_vib
    enthalpy_J_mol = thermal_J_mol + rt_J_mol
    entropy = s_trans + s_rot + s_vib + s_elec
    gibbs_J_mol = enthalpy_J_mol - temperature_k * entropy
    return Thermochemistry(
        temperature_k=float(temperature_k), pressure_pa=float(pressure_pa),
        symmetry_number=int(symmetry_number), spin_multiplicity=int(spin_multiplicity), is_linear=linear,
        zpe_kcal_mol=float(zpe * J_TO_KCAL),
        thermal_energy_kcal_mol=float(thermal_J_mol * J_TO_KCAL),
        enthalpy_correction_kcal_mol=float(enthalpy_J_mol * J_TO_KCAL),
        entropy_J_mol_K=float(entropy),
        s_translational_J_mol_K=float(s_trans), s_rotational_J_mol_K=float(s_rot),
        s_vibrational_J_mol_K=float(s_vib), s_electronic_J_mol_K=float(s_elec),
        gibbs_correction_kcal_mol=float(gibbs_J_mol * J_TO_KCAL),
        used_qrrho=qrrho is not None, n_imaginary_ignored=n_imaginary,
    )


def _check_options(imaginary: str, symmetry_number: int, spin_multiplicity: int) -> None:
    """Refuse an unknown ``imaginary`` policy and a symmetry number or multiplicity below 1."""
    if imaginary not in ("ignore", "raise"):
        raise ValueError("imaginary must be 'ignore' or 'raise'")
    if symmetry_number < 1:
        raise ValueError("symmetry_number must be a positive integer")
    if spin_multiplicity < 1:
        raise ValueError("spin_multiplicity must be a positive integer")


def _real_wavenumbers(frequencies_cm1: ArrayLike, n_atoms: int, linear: bool,
                      imaginary: str) -> tuple[np.ndarray, int]:
    """The positive wavenumbers and the number of imaginary ones, after checking the 3N−6/3N−5 count."""
    expected = 0 if n_atoms == 1 else 3 * n_atoms - (5 if linear else 6)
    nu_all = np.asarray(frequencies_cm1, dtype=float).reshape(-1)
    if nu_all.size != expected:
        raise ValueError(
            f"expected {expected} vibrational frequencies for {n_atoms} atoms "
            f"({'linear' if linear else 'nonlinear'}), got {nu_all.size}")
    n_imaginary = int(np.count_nonzero(nu_all < 0.0))
    if n_imaginary and imaginary == "raise":
        raise ValueError(f"{n_imaginary} imaginary frequencies: {nu_all[nu_all < 0.0]}")
    return nu_all[nu_all > 0.0], n_imaginary


def _vibrational_energies_J_mol(nu: np.ndarray, temperature_k: float,
                                qrrho: QuasiRRHO | None) -> tuple[float, float]:
    """(ZPE, ZPE + thermal vibrational energy) in J/mol; quasi-RRHO damps the latter when asked."""
    zpe_modes, thermal_modes = harmonic_energy_J_mol(nu, temperature_k)
    zpe = float(zpe_modes.sum())
    vib_energy_modes = zpe_modes + thermal_modes
    if qrrho is not None and qrrho.damp_enthalpy:
        w = qrrho.weights(nu)
        rt_J_mol = GAS_CONSTANT_J_MOL_K * temperature_k
        vib_energy_modes = w * vib_energy_modes + (1.0 - w) * 0.5 * rt_J_mol
    return zpe, float(vib_energy_modes.sum())


# ----------------------------------------------------------------------------
# standard states, ensembles, mixing
# ----------------------------------------------------------------------------

def standard_state_correction_kcal_mol(temperature_k: float = 298.15,
                                       pressure_pa: float = 101325.0,
                                       concentration_mol_L: float = 1.0) -> float:
    """ΔG to move one species from gas at ``pressure_pa`` to ``concentration_mol_L``.

    RT ln(c·R·T/p); +1.89 kcal/mol at 298.15 K for 1 atm → 1 mol/L.
    """
    concentration_mol_m3 = 1000.0 * concentration_mol_L
    ratio = concentration_mol_m3 * GAS_CONSTANT_J_MOL_K * temperature_k / pressure_pa
    return float(GAS_CONSTANT_J_MOL_K * temperature_k * np.log(ratio) * J_TO_KCAL)


def boltzmann_ensemble(free_energies_kcal_mol: ArrayLike, temperature_k: float = 298.15
                       ) -> tuple[float, np.ndarray]:
    """Ensemble free energy G = −RT ln Σ exp(−G_i/RT) and the Boltzmann weights.

    Shifted by the lowest G_i, so absolute energies in kcal/mol are safe.
    """
    energies = np.asarray(free_energies_kcal_mol, dtype=float).reshape(-1)
    if energies.size == 0:
        raise ValueError("no free energies given")
    rt_kcal_mol = GAS_CONSTANT_J_MOL_K * temperature_k * J_TO_KCAL
    lowest = energies.min()
    factors = np.exp(-(energies - lowest) / rt_kcal_mol)
    total = factors.sum()
    return float(lowest - rt_kcal_mol * np.log(total)), factors / total


def enantiomer_mixing_entropy_J_mol_K() -> float:
    """R ln 2: entropy of mixing of a racemate of a chiral species."""
    return float(GAS_CONSTANT_J_MOL_K * np.log(2.0))
