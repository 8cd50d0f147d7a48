"""Vibrational analysis and ideal-gas thermochemistry.

Every reference formula is written out here independently of the module.
"""

import doctest
import math

import numpy as np
import pytest

from cationcalc.chem import thermo, units
from cationcalc.chem.thermo import QuasiRRHO

H = units.PLANCK_J_S
C_CM_S = units.SPEED_OF_LIGHT_M_S * 100.0
KB = units.BOLTZMANN_J_K
R = units.GAS_CONSTANT_J_MOL_K
T298 = 298.15
EV_PER_A2_TO_J_PER_M2 = units.EV_TO_J_MOL / units.AVOGADRO * 1e20

# water: r(OH) = 0.9578 Å, HOH = 104.48° (value from memory of Hoy & Bunker,
# J. Mol. Spectrosc. 74, 1 (1979), equilibrium structure)
_HALF_ANGLE = math.radians(104.48 / 2)
WATER_POSITIONS = np.array([
    [0.0, 0.0, 0.0],
    [0.9578 * math.sin(_HALF_ANGLE), 0.0, 0.9578 * math.cos(_HALF_ANGLE)],
    [-0.9578 * math.sin(_HALF_ANGLE), 0.0, 0.9578 * math.cos(_HALF_ANGLE)],
])
WATER_MASSES = np.array([15.999, 1.008, 1.008])
# fundamentals 3657, 1595, 3756 cm⁻¹ (value from memory of Shimanouchi,
# Tables of Molecular Vibrational Frequencies, Consolidated Vol. I, NSRDS-NBS 39 (1972))
WATER_FREQUENCIES_CM1 = np.array([1595.0, 3657.0, 3756.0])


def spring_hessian(positions, springs):
    """Exact Hessian (eV/Å²) of Σ ½k(|r_i − r_j| − d_ij)² at d_ij = |r_i − r_j|."""
    n = len(positions)
    hessian = np.zeros((3 * n, 3 * n))
    for i, j, k in springs:
        u = positions[i] - positions[j]
        u /= np.linalg.norm(u)
        block = k * np.outer(u, u)
        hessian[3 * i:3 * i + 3, 3 * i:3 * i + 3] += block
        hessian[3 * j:3 * j + 3, 3 * j:3 * j + 3] += block
        hessian[3 * i:3 * i + 3, 3 * j:3 * j + 3] -= block
        hessian[3 * j:3 * j + 3, 3 * i:3 * i + 3] -= block
    return hessian


def wavenumber_cm1(force_constant_ev_A2, reduced_mass_amu):
    """ν̃ = (1/2πc)·sqrt(k/μ), signed like k."""
    omega = math.sqrt(abs(force_constant_ev_A2) * EV_PER_A2_TO_J_PER_M2 / (reduced_mass_amu * units.AMU_KG))
    return math.copysign(omega / (2 * math.pi * C_CM_S), force_constant_ev_A2)


def random_rotation(seed):
    q, r = np.linalg.qr(np.random.default_rng(seed).normal(size=(3, 3)))
    q = q * np.sign(np.diag(r))
    return q if np.linalg.det(q) > 0 else -q


def random_cluster(seed, n_atoms=6):
    rng = np.random.default_rng(seed)
    positions = rng.uniform(-1.5, 1.5, size=(n_atoms, 3))
    masses = rng.uniform(1.0, 20.0, size=n_atoms)
    springs = [(i, j, rng.uniform(5.0, 40.0)) for i in range(n_atoms) for j in range(i)]
    return positions, masses, springs


# ----------------------------------------------------------------------------
# vibrational analysis
# ----------------------------------------------------------------------------

def test_diatomic_spring_frequency_and_mode():
    positions = np.array([[0.1, -0.2, 0.3], [0.1, -0.2, 1.43]])
    masses = np.array([12.0, 16.0])
    k = 120.0
    result = thermo.vibrational_analysis(spring_hessian(positions, [(0, 1, k)]), masses, positions)
    expected = wavenumber_cm1(k, 12.0 * 16.0 / 28.0)
    assert result.is_linear
    assert result.frequencies_cm1.shape == (1,)
    assert result.frequencies_cm1[0] == pytest.approx(expected, rel=1e-9)
    mode = result.modes[0]
    assert np.linalg.norm(mode) == pytest.approx(1.0)
    assert np.allclose(mode[:, :2], 0.0, atol=1e-10)
    # centre of mass stays put: m1·x1 + m2·x2 = 0
    assert masses @ mode[:, 2] == pytest.approx(0.0, abs=1e-10)


def test_negative_curvature_gives_negative_wavenumber():
    positions = np.array([[0.0, 0.0, 0.0], [1.2, 0.0, 0.0]])
    masses = np.array([1.008, 1.008])
    result = thermo.vibrational_analysis(spring_hessian(positions, [(0, 1, -3.0)]), masses, positions)
    assert result.frequencies_cm1[0] == pytest.approx(wavenumber_cm1(-3.0, 0.504), rel=1e-9)
    assert result.frequencies_cm1[0] < 0
    assert result.n_imaginary == 1


def test_linear_triatomic_has_four_modes_with_known_stretches():
    # O=C=O with springs only along the bonds: bends have no stiffness
    positions = np.array([[0.0, 0.0, -1.16], [0.0, 0.0, 0.0], [0.0, 0.0, 1.16]])
    m_o, m_c, k = 15.999, 12.011, 100.0
    result = thermo.vibrational_analysis(
        spring_hessian(positions, [(0, 1, k), (1, 2, k)]), [m_o, m_c, m_o], positions)
    symmetric = wavenumber_cm1(k, m_o)  # ω² = k/m_O
    antisymmetric = wavenumber_cm1(k, 1.0 / (1.0 / m_o + 2.0 / m_c))  # ω² = k(1/m_O + 2/m_C)
    assert result.is_linear
    assert result.frequencies_cm1.shape == (4,)
    assert np.allclose(result.frequencies_cm1[:2], 0.0, atol=1e-2)
    assert result.frequencies_cm1[2:] == pytest.approx([symmetric, antisymmetric], rel=1e-9)


def test_nonlinear_cluster_matches_nonzero_eigenvalues_and_is_invariant():
    positions, masses, springs = random_cluster(seed=3)
    hessian = spring_hessian(positions, springs)
    result = thermo.vibrational_analysis(hessian, masses, positions)
    assert not result.is_linear
    assert result.frequencies_cm1.shape == (12,)
    assert result.modes.shape == (12, 6, 3)
    assert np.allclose(np.linalg.norm(result.modes.reshape(12, -1), axis=1), 1.0)

    # independent route: the exact spring Hessian has six zero eigenvalues
    inverse_sqrt_m = np.repeat(masses ** -0.5, 3)
    eigenvalues = np.linalg.eigvalsh(hessian * np.outer(inverse_sqrt_m, inverse_sqrt_m))
    assert np.sum(np.abs(eigenvalues) < 1e-8) == 6
    vibrational = np.sort(eigenvalues[np.argsort(np.abs(eigenvalues))][6:])
    expected = np.sqrt(vibrational * EV_PER_A2_TO_J_PER_M2 / units.AMU_KG) / (2 * math.pi * C_CM_S)
    assert result.frequencies_cm1 == pytest.approx(expected, rel=1e-7)

    moved = positions @ random_rotation(5).T + np.array([4.0, -7.0, 2.5])
    moved_result = thermo.vibrational_analysis(spring_hessian(moved, springs), masses, moved)
    assert moved_result.frequencies_cm1 == pytest.approx(result.frequencies_cm1, rel=1e-8)


def test_rigid_body_contamination_is_projected_out():
    """Numerical Hessians carry spurious translation/rotation curvature; it must vanish."""
    positions, masses, springs = random_cluster(seed=8)
    clean = spring_hessian(positions, springs)
    centred = positions - masses @ positions / masses.sum()
    sqrt_m = np.sqrt(masses)
    vectors = []
    for axis in np.eye(3):
        vectors.append((sqrt_m[:, None] * axis).reshape(-1))
        vectors.append((sqrt_m[:, None] * np.cross(axis, centred)).reshape(-1))
    basis, _ = np.linalg.qr(np.array(vectors).T)
    curvatures = np.array([0.02, -0.03, 0.05, 0.01, -0.015, 0.04])  # eV/(Å² amu): tens of cm⁻¹
    contamination_mw = basis @ np.diag(curvatures) @ basis.T
    sqrt_m3 = np.repeat(sqrt_m, 3)
    contaminated = clean + contamination_mw * np.outer(sqrt_m3, sqrt_m3)
    # the contamination is real: unprojected it shifts the spectrum
    assert np.abs(np.linalg.eigvalsh(contaminated - clean)).max() > 0.1

    reference = thermo.vibrational_analysis(clean, masses, positions).frequencies_cm1
    result = thermo.vibrational_analysis(contaminated, masses, positions)
    assert result.frequencies_cm1.shape == (12,)
    assert result.frequencies_cm1 == pytest.approx(reference, rel=1e-8)


def test_asymmetric_input_is_symmetrised():
    positions, masses, springs = random_cluster(seed=4)
    hessian = spring_hessian(positions, springs)
    skew = np.random.default_rng(1).normal(size=hessian.shape)
    skew = 0.5 * (skew - skew.T)
    reference = thermo.vibrational_analysis(hessian, masses, positions).frequencies_cm1
    result = thermo.vibrational_analysis(hessian + skew, masses, positions).frequencies_cm1
    assert result == pytest.approx(reference, rel=1e-10)


def test_single_atom_has_no_modes():
    result = thermo.vibrational_analysis(np.zeros((3, 3)), [39.948], [[1.0, 2.0, 3.0]])
    assert result.frequencies_cm1.shape == (0,)
    assert result.modes.shape == (0, 1, 3)
    assert not result.is_linear


def test_moments_and_linearity():
    # two unit masses 1 Å apart: I = μ r² = 0.5 amu Å²
    assert thermo.moments_of_inertia_amu_A2([[0, 0, 0], [0, 0, 1]], [1, 1]) == pytest.approx([0, 0.5, 0.5])
    assert thermo.is_linear([[0, 0, -1.16], [0, 0, 0], [0, 0, 1.16]], [16, 12, 16])
    assert not thermo.is_linear(WATER_POSITIONS, WATER_MASSES)
    assert not thermo.is_linear([[0, 0, 0]], [12.0])


# ----------------------------------------------------------------------------
# quasi-RRHO
# ----------------------------------------------------------------------------

def grimme_mode_by_hand(wavenumber, temperature):
    """Grimme, Chem. Eur. J. 18, 9955 (2012): S = w·S_V + (1 − w)·S_R for one mode."""
    x = H * C_CM_S * wavenumber / (KB * temperature)
    s_harmonic = R * (x / (math.exp(x) - 1.0) - math.log(1.0 - math.exp(-x)))
    mu = H / (8 * math.pi**2 * wavenumber * C_CM_S)
    b_av = 1e-44
    mu_eff = mu * b_av / (mu + b_av)
    s_rotor = R * (0.5 + math.log(math.sqrt(8 * math.pi**3 * mu_eff * KB * temperature / H**2)))
    w = 1.0 / (1.0 + (100.0 / wavenumber) ** 4)
    return w, s_harmonic, s_rotor


def heavy_diatomic():
    return np.array([[0.0, 0.0, 0.0], [0.0, 0.0, 2.5]]), np.array([80.0, 80.0])


def test_qrrho_entropy_of_one_50_cm1_mode():
    w, s_harmonic, s_rotor = grimme_mode_by_hand(50.0, T298)
    assert w == pytest.approx(1.0 / 17.0)
    expected = w * s_harmonic + (1 - w) * s_rotor
    assert thermo.vibrational_entropy_J_mol_K([50.0], T298) == pytest.approx(expected, rel=1e-10)
    assert thermo.vibrational_entropy_J_mol_K([50.0], T298, qrrho=None) == pytest.approx(s_harmonic, rel=1e-10)

    positions, masses = heavy_diatomic()
    damped = thermo.thermochemistry([50.0], masses, positions, symmetry_number=2)
    plain = thermo.thermochemistry([50.0], masses, positions, symmetry_number=2, qrrho=None)
    assert damped.used_qrrho and not plain.used_qrrho
    assert damped.s_vibrational_J_mol_K == pytest.approx(expected, rel=1e-10)
    assert plain.s_vibrational_J_mol_K == pytest.approx(s_harmonic, rel=1e-10)
    # the free rotor caps the entropy of a soft mode
    assert damped.entropy_J_mol_K < plain.entropy_J_mol_K
    assert damped.enthalpy_correction_kcal_mol == pytest.approx(plain.enthalpy_correction_kcal_mol)


def test_qrrho_leaves_stiff_modes_harmonic():
    stiff = [800.0, 1500.0, 3000.0]  # w > 0.9997
    assert thermo.vibrational_entropy_J_mol_K(stiff, T298) == pytest.approx(
        thermo.vibrational_entropy_J_mol_K(stiff, T298, qrrho=None), abs=2e-3)


def test_head_gordon_enthalpy_damping_of_one_mode():
    """Li, Gilbert, Head-Gordon et al., J. Phys. Chem. C 119, 1840 (2015): E = w·E_harm + (1 − w)·RT/2."""
    positions, masses = heavy_diatomic()
    nu = 50.0
    quantum = H * C_CM_S * nu * units.AVOGADRO
    e_harmonic = 0.5 * quantum + quantum / (math.exp(H * C_CM_S * nu / (KB * T298)) - 1.0)
    w = 1.0 / (1.0 + (100.0 / nu) ** 4)
    shift_kcal_mol = (1 - w) * (0.5 * R * T298 - e_harmonic) * units.J_TO_KCAL
    plain = thermo.thermochemistry([nu], masses, positions, symmetry_number=2)
    damped = thermo.thermochemistry([nu], masses, positions, symmetry_number=2,
                                    qrrho=QuasiRRHO(damp_enthalpy=True))
    assert abs(shift_kcal_mol) > 0.1
    assert damped.enthalpy_correction_kcal_mol - plain.enthalpy_correction_kcal_mol == pytest.approx(
        shift_kcal_mol, rel=1e-9)
    assert damped.entropy_J_mol_K == pytest.approx(plain.entropy_J_mol_K)


# ----------------------------------------------------------------------------
# thermochemistry
# ----------------------------------------------------------------------------

def test_argon_translational_entropy():
    mass_amu = 39.948  # standard atomic weight of Ar (value from memory of IUPAC CIAAW tables)
    pressure = 1.0e5
    m = mass_amu * units.AMU_KG
    sackur_tetrode = R * (math.log((2 * math.pi * m * KB * T298 / H**2) ** 1.5 * KB * T298 / pressure) + 2.5)
    result = thermo.thermochemistry([], [mass_amu], [[0.0, 0.0, 0.0]], symmetry_number=1,
                                    pressure_pa=pressure)
    assert result.s_translational_J_mol_K == pytest.approx(sackur_tetrode, rel=1e-12)
    assert result.s_rotational_J_mol_K == 0.0 and result.s_vibrational_J_mol_K == 0.0
    # S°(Ar, 298.15 K, 1 bar) = 154.85 J/mol/K (value from memory of Chase, NIST-JANAF
    # Thermochemical Tables, 4th ed., J. Phys. Chem. Ref. Data Monograph 9 (1998))
    assert result.entropy_J_mol_K == pytest.approx(154.85, abs=0.05)
    rt = units.rt_kcal_mol(T298)
    assert result.zpe_kcal_mol == 0.0
    assert result.thermal_energy_kcal_mol == pytest.approx(1.5 * rt)
    assert result.enthalpy_correction_kcal_mol == pytest.approx(2.5 * rt)
    assert result.gibbs_correction_kcal_mol == pytest.approx(
        2.5 * rt - T298 * sackur_tetrode * units.J_TO_KCAL)


def test_water_entropy_against_janaf():
    result = thermo.thermochemistry(WATER_FREQUENCIES_CM1, WATER_MASSES, WATER_POSITIONS,
                                    symmetry_number=2, pressure_pa=1.0e5, qrrho=None)
    # S°(H2O, g, 298.15 K, 1 bar) = 188.83 J/mol/K (value from memory of Chase, NIST-JANAF
    # Thermochemical Tables, 4th ed., J. Phys. Chem. Ref. Data Monograph 9 (1998));
    # 0.3 J/mol/K allows for the rigid-rotor/harmonic model
    assert result.entropy_J_mol_K == pytest.approx(188.83, abs=0.3)
    assert not result.is_linear


@pytest.mark.parametrize("case", ["water", "carbon dioxide"])
def test_agrees_with_ase_ideal_gas_thermo(case):
    """Cross-check against an independent RRHO implementation (ase.thermochemistry)."""
    from ase import Atoms
    from ase.thermochemistry import IdealGasThermo

    if case == "water":
        symbols, positions, masses = "OH2", WATER_POSITIONS, WATER_MASSES
        frequencies, sigma, geometry, spin = WATER_FREQUENCIES_CM1, 2, "nonlinear", 0
    else:
        symbols, masses = "OCO", np.array([15.999, 12.011, 15.999])
        positions = np.array([[0, 0, -1.16], [0, 0, 0], [0, 0, 1.16]])
        # CO2 fundamentals (value from memory of Shimanouchi, NSRDS-NBS 39 (1972)); a triplet
        # multiplicity is used here only to exercise the electronic term
        frequencies, sigma, geometry, spin = np.array([667.0, 667.0, 1333.0, 2349.0]), 2, "linear", 1
    atoms = Atoms(symbols, positions=positions, masses=masses)
    ase_thermo = IdealGasThermo(vib_energies=frequencies * units.INVCM_EV, geometry=geometry,
                                potentialenergy=0.0, atoms=atoms, symmetrynumber=sigma, spin=spin)
    result = thermo.thermochemistry(frequencies, masses, positions, symmetry_number=sigma,
                                    spin_multiplicity=2 * spin + 1, qrrho=None)
    ev_to_kcal = units.EV_TO_KCAL_MOL
    ase_s = ase_thermo.get_entropy(T298, 101325.0, verbose=False) * units.EV_TO_J_MOL
    ase_h = ase_thermo.get_enthalpy(T298, verbose=False) * ev_to_kcal
    ase_g = ase_thermo.get_gibbs_energy(T298, 101325.0, verbose=False) * ev_to_kcal
    assert result.entropy_J_mol_K == pytest.approx(ase_s, abs=2e-3)
    assert result.enthalpy_correction_kcal_mol == pytest.approx(ase_h, abs=1e-4)
    assert result.gibbs_correction_kcal_mol == pytest.approx(ase_g, abs=1e-3)
    assert result.zpe_kcal_mol == pytest.approx(
        0.5 * H * C_CM_S * frequencies.sum() * units.AVOGADRO * units.J_TO_KCAL)
    assert result.s_electronic_J_mol_K == pytest.approx(R * math.log(2 * spin + 1))


def test_symmetry_number_lowers_rotational_entropy_by_R_ln_sigma():
    one = thermo.thermochemistry(WATER_FREQUENCIES_CM1, WATER_MASSES, WATER_POSITIONS, symmetry_number=1)
    two = thermo.thermochemistry(WATER_FREQUENCIES_CM1, WATER_MASSES, WATER_POSITIONS, symmetry_number=2)
    assert one.s_rotational_J_mol_K - two.s_rotational_J_mol_K == pytest.approx(R * math.log(2))


def test_imaginary_frequencies_are_left_out():
    reference = thermo.vibrational_entropy_J_mol_K([1595.0, 3657.0], T298)
    result = thermo.thermochemistry([-400.0, 1595.0, 3657.0], WATER_MASSES, WATER_POSITIONS,
                                    symmetry_number=2)
    assert result.n_imaginary_ignored == 1
    assert result.s_vibrational_J_mol_K == pytest.approx(reference)
    assert result.zpe_kcal_mol == pytest.approx(
        0.5 * H * C_CM_S * (1595.0 + 3657.0) * units.AVOGADRO * units.J_TO_KCAL)
    with pytest.raises(ValueError):
        thermo.thermochemistry([-400.0, 1595.0, 3657.0], WATER_MASSES, WATER_POSITIONS,
                               symmetry_number=2, imaginary="raise")


def test_wrong_number_of_frequencies_is_refused():
    with pytest.raises(ValueError):
        thermo.thermochemistry(np.zeros(9), WATER_MASSES, WATER_POSITIONS, symmetry_number=2)


# ----------------------------------------------------------------------------
# standard state, ensembles, mixing
# ----------------------------------------------------------------------------

def test_standard_state_correction_1atm_to_1M():
    # RT ln(24.46) = 1.89 kcal/mol at 298.15 K (common practice)
    assert thermo.standard_state_correction_kcal_mol() == pytest.approx(1.89, abs=0.005)
    molar_volume_L = R * T298 / units.ATMOSPHERE_PA * 1000.0
    assert molar_volume_L == pytest.approx(24.46, abs=0.01)
    assert thermo.standard_state_correction_kcal_mol(concentration_mol_L=1.0 / molar_volume_L) == \
        pytest.approx(0.0, abs=1e-12)


def test_two_degenerate_conformers():
    g_one = -123456.789
    g_ensemble, weights = thermo.boltzmann_ensemble([g_one, g_one], T298)
    assert g_ensemble == pytest.approx(g_one - units.rt_kcal_mol(T298) * math.log(2), abs=1e-9)
    assert weights == pytest.approx([0.5, 0.5])


def test_boltzmann_weights_follow_free_energy_gap():
    gap = 1.0
    _, weights = thermo.boltzmann_ensemble([0.0, gap, 50.0], T298)
    assert weights[1] / weights[0] == pytest.approx(math.exp(-gap / units.rt_kcal_mol(T298)))
    assert weights.sum() == pytest.approx(1.0)
    assert weights[2] < 1e-30
    with pytest.raises(ValueError):
        thermo.boltzmann_ensemble([], T298)


def test_enantiomer_mixing_entropy():
    assert thermo.enantiomer_mixing_entropy_J_mol_K() == pytest.approx(R * math.log(2))
    assert thermo.enantiomer_mixing_entropy_J_mol_K() == pytest.approx(5.763, abs=1e-3)


def test_docstring_examples():
    assert doctest.testmod(thermo).failed == 0
