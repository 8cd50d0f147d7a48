"""Point groups and rotational symmetry numbers.

Symmetry numbers of the small G2 molecules and of the three cations are the
standard values (common practice: σ is the order of the rotational subgroup;
tert-butyl cation 3 (C3h), tropylium 14 (D7h), trityl cation 6 (D3) as in the
project's shared engine notes). The group orders of the synthetic molecules
follow from how they are built (orbits of generic points under the group).
"""

import time

import numpy as np
import pytest
from ase.build import molecule

from cationcalc.chem.symmetry import PointGroup, point_group, symmetry_number


# ----------------------------------------------------------------------------
# geometry builders
# ----------------------------------------------------------------------------

def rotation(axis, angle_rad):
    axis = np.asarray(axis, dtype=float)
    axis = axis / np.linalg.norm(axis)
    k = np.array([[0, -axis[2], axis[1]], [axis[2], 0, -axis[0]], [-axis[1], axis[0], 0]])
    return np.eye(3) + np.sin(angle_rad) * k + (1 - np.cos(angle_rad)) * k @ k


def mirror(normal):
    normal = np.asarray(normal, dtype=float)
    normal = normal / np.linalg.norm(normal)
    return np.eye(3) - 2.0 * np.outer(normal, normal)


def generate_group(generators):
    elements = [np.eye(3)]
    grown = True
    while grown:
        grown = False
        for element in list(elements):
            for generator in generators:
                product = generator @ element
                if not any(np.allclose(product, known, atol=1e-8) for known in elements):
                    elements.append(product)
                    grown = True
    return elements


def orbit_molecule(generators, points_by_element):
    """Images of generic points under the group: a molecule with exactly that symmetry."""
    group = generate_group(generators)
    numbers, positions = [], []
    for element, point in points_by_element:
        for matrix in group:
            numbers.append(element)
            positions.append(matrix @ np.asarray(point, dtype=float))
    positions = np.array(positions)
    distances = np.linalg.norm(positions[:, None] - positions[None, :], axis=2)
    assert distances[np.triu_indices(len(positions), 1)].min() > 0.5  # builder sanity
    return np.array(numbers), positions


def tert_butyl_cation():
    """Planar C3h tert-butyl cation: each methyl has one H in the CCC plane."""
    numbers, positions = [6], [np.zeros(3)]
    z = np.array([0.0, 0.0, 1.0])
    tilt = np.radians(180.0 - 109.47)
    for k in range(3):
        u = rotation(z, 2 * np.pi * k / 3) @ np.array([1.0, 0.0, 0.0])
        v = np.cross(z, u)
        carbon = 1.47 * u
        numbers.append(6)
        positions.append(carbon)
        for phi in np.radians([0.0, 120.0, 240.0]):
            direction = np.cos(tilt) * u + np.sin(tilt) * (np.cos(phi) * v + np.sin(phi) * z)
            numbers.append(1)
            positions.append(carbon + 1.09 * direction)
    return np.array(numbers), np.array(positions)


def tropylium():
    """Regular planar heptagon C7H7+ (D7h)."""
    radius = 1.39 / (2 * np.sin(np.pi / 7))
    angles = 2 * np.pi * np.arange(7) / 7
    ring = np.column_stack([np.cos(angles), np.sin(angles), np.zeros(7)])
    positions = np.vstack([radius * ring, (radius + 1.08) * ring])
    return np.array([6] * 7 + [1] * 7), positions


def trityl_cation(twist_deg=30.0):
    """C(C6H5)3+ with all three phenyls twisted the same way (D3 propeller)."""
    numbers, positions = [6], [np.zeros(3)]
    z = np.array([0.0, 0.0, 1.0])
    twist = np.radians(twist_deg)
    for k in range(3):
        u = rotation(z, 2 * np.pi * k / 3) @ np.array([1.0, 0.0, 0.0])
        v = np.cross(z, u)
        w = np.cos(twist) * v + np.sin(twist) * z
        ring_centre = (1.45 + 1.40) * u
        for j in range(6):
            direction = np.cos(np.pi * j / 3) * (-u) + np.sin(np.pi * j / 3) * w
            numbers.append(6)
            positions.append(ring_centre + 1.40 * direction)
            if j > 0:
                numbers.append(1)
                positions.append(ring_centre + 2.48 * direction)
    return np.array(numbers), np.array(positions)


def add_noise(positions, rms_angstrom, seed):
    rng = np.random.default_rng(seed)
    return positions + rng.normal(0.0, rms_angstrom / np.sqrt(3), positions.shape)


# ----------------------------------------------------------------------------
# tests
# ----------------------------------------------------------------------------

G2_CASES = [
    # symmetry numbers: standard values (common practice)
    ("CH4", "Td", 12),
    ("H2O", "C2v", 2),
    ("NH3", "C3v", 3),
    ("C2H6", "D3d", 6),
    ("C6H6", "D6h", 12),
    ("CO2", "D∞h", 2),
    ("HCN", "C∞v", 1),
    ("CO", "C∞v", 1),
    ("C2H4", "D2h", 4),
    ("C3H4_D2d", "D2d", 4),
    ("trans-butane", "C2h", 2),
    ("N2H4", "C2", 2),
    ("CH3OH", "Cs", 1),
]


@pytest.mark.parametrize("name, group_name, sigma", G2_CASES)
def test_g2_molecules(name, group_name, sigma):
    atoms = molecule(name)
    group = point_group(atoms.numbers, atoms.positions)
    assert (group.name, group.symmetry_number) == (group_name, sigma)
    assert symmetry_number(atoms.numbers, atoms.positions) == sigma


CATIONS = [
    # tert-butyl 3 (C3h), tropylium 14 (D7h), trityl 6 (D3): shared engine notes
    (tert_butyl_cation, "C3h", 3, False),
    (tropylium, "D7h", 14, False),
    (trityl_cation, "D3", 6, True),
]


@pytest.mark.parametrize("build, group_name, sigma, chiral", CATIONS)
def test_cations(build, group_name, sigma, chiral):
    numbers, positions = build()
    group = point_group(numbers, positions)
    assert group == PointGroup(group_name, sigma, sigma, chiral)


@pytest.mark.parametrize("build, group_name, sigma, chiral", CATIONS)
def test_cations_with_noise_and_moved(build, group_name, sigma, chiral):
    numbers, positions = build()
    moved = positions @ rotation([0.3, -1.0, 0.7], 1.1).T + np.array([3.0, -2.0, 5.0])
    for seed in range(3):
        noisy = add_noise(moved, 0.02, seed)
        group = point_group(numbers, noisy)
        assert (group.name, group.symmetry_number) == (group_name, sigma)


@pytest.mark.parametrize("build, group_name, sigma, chiral", CATIONS)
def test_cations_every_atom_moved_0p05_angstrom(build, group_name, sigma, chiral):
    """Optimised structures are symmetric to ~0.05 Å: still recognised at the default."""
    numbers, positions = build()
    rng = np.random.default_rng(4)
    for _ in range(5):
        shifts = rng.normal(size=positions.shape)
        shifts *= 0.05 / np.linalg.norm(shifts, axis=1)[:, None]
        assert point_group(numbers, positions + shifts).name == group_name
    scrambled = add_noise(positions, 0.4, 8)
    assert point_group(numbers, scrambled).symmetry_number == 1


def test_one_ring_twisted_further_leaves_c2():
    numbers, positions = trityl_cation(30.0)
    _, more_twisted = trityl_cation(45.0)
    positions[1:12] = more_twisted[1:12]  # first phenyl (atoms 1-11) only
    assert point_group(numbers, positions) == PointGroup("C2", 2, 2, True)


def test_noisy_g2_keeps_symmetry_number():
    for name, group_name, sigma in G2_CASES:
        atoms = molecule(name)
        noisy = add_noise(atoms.positions, 0.02, 11)
        assert point_group(atoms.numbers, noisy).name == group_name, name


def test_tight_tolerance_rejects_noise():
    numbers, positions = tropylium()
    noisy = add_noise(positions, 0.05, 3)
    assert point_group(numbers, noisy, tolerance_angstrom=0.005).symmetry_number == 1
    assert point_group(numbers, noisy, tolerance_angstrom=0.2).name == "D7h"


def test_untwisted_trityl_is_d3h():
    numbers, positions = trityl_cation(twist_deg=0.0)
    assert point_group(numbers, positions).name == "D3h"


def test_chiral_chcfclbr_is_c1():
    from rdkit import Chem
    from rdkit.Chem import AllChem

    mol = Chem.AddHs(Chem.MolFromSmiles("FC(Cl)Br"))
    assert AllChem.EmbedMolecule(mol, randomSeed=7) == 0
    positions = mol.GetConformer().GetPositions()
    numbers = [atom.GetAtomicNum() for atom in mol.GetAtoms()]
    assert point_group(numbers, positions) == PointGroup("C1", 1, 1, True)


def test_atom_and_element_symbols():
    assert point_group([18], [[1.0, 2.0, 3.0]]) == PointGroup("Kh", 1, 1, False)
    atoms = molecule("CH4")
    assert point_group(atoms.get_chemical_symbols(), atoms.positions).name == "Td"


z_axis, x_axis = [0, 0, 1], [1, 0, 0]
C3_111 = rotation([1, 1, 1], 2 * np.pi / 3)
SYNTHETIC = [
    # (generators, expected name, expected σ = number of proper rotations)
    ([rotation(z_axis, np.pi)], "C2", 2),
    ([rotation(z_axis, 2 * np.pi / 3)], "C3", 3),
    ([mirror(z_axis)], "Cs", 1),
    ([-np.eye(3)], "Ci", 1),
    ([mirror(z_axis) @ rotation(z_axis, np.pi / 2)], "S4", 2),
    ([mirror(z_axis) @ rotation(z_axis, np.pi / 3)], "S6", 3),
    ([rotation(z_axis, np.pi), mirror(z_axis)], "C2h", 2),
    ([rotation(z_axis, np.pi / 2), mirror(z_axis)], "C4h", 4),
    ([rotation(z_axis, 2 * np.pi / 3), mirror(x_axis)], "C3v", 3),
    ([rotation(z_axis, np.pi), rotation(x_axis, np.pi)], "D2", 4),
    ([rotation(z_axis, np.pi / 2), rotation(x_axis, np.pi)], "D4", 8),
    ([rotation(z_axis, np.pi), rotation(x_axis, np.pi), mirror(z_axis)], "D2h", 4),
    ([mirror(z_axis) @ rotation(z_axis, np.pi / 2), rotation(x_axis, np.pi)], "D2d", 4),
    ([rotation(z_axis, 2 * np.pi / 3), rotation(x_axis, np.pi), mirror(z_axis)], "D3h", 6),
    ([mirror(z_axis) @ rotation(z_axis, np.pi / 5), rotation(x_axis, np.pi)], "D5d", 10),
    ([rotation(z_axis, np.pi), C3_111], "T", 12),
    ([rotation(z_axis, np.pi), C3_111, -np.eye(3)], "Th", 12),
    ([rotation(z_axis, np.pi), C3_111, mirror([1, -1, 0])], "Td", 12),
    ([rotation(z_axis, np.pi / 2), C3_111], "O", 24),
    ([rotation(z_axis, np.pi / 2), C3_111, -np.eye(3)], "Oh", 24),
]


@pytest.mark.parametrize("generators, group_name, sigma", SYNTHETIC)
def test_orbits_of_generic_points(generators, group_name, sigma):
    # generic points, none near a symmetry element of any group below
    points = [(6, [-0.38, 2.32, 3.37]), (1, [3.22, 2.44, -1.42]), (7, [3.3, -2.77, -1.92])]
    numbers, positions = orbit_molecule(generators, points)
    group = point_group(numbers, positions)
    assert (group.name, group.symmetry_number) == (group_name, sigma)
    noisy = add_noise(positions, 0.02, 5)
    assert point_group(numbers, noisy).name == group_name


def test_large_icosahedral_molecule_is_fast():
    """C60 and a 120-atom C60H60 (H radially outward), both Ih, σ = 60."""
    fullerene = molecule("C60")
    centred = fullerene.positions - fullerene.positions.mean(axis=0)
    hydrogens = centred * (1.0 + 1.1 / np.linalg.norm(centred, axis=1))[:, None]
    numbers = np.concatenate([fullerene.numbers, np.ones(60, dtype=int)])
    positions = add_noise(np.vstack([centred, hydrogens]), 0.02, 2)
    start = time.perf_counter()
    assert point_group(fullerene.numbers, fullerene.positions).name == "Ih"
    group = point_group(numbers, positions)
    distorted = point_group(numbers, add_noise(positions, 0.4, 9))
    elapsed = time.perf_counter() - start
    assert (group.name, group.symmetry_number) == ("Ih", 60)
    assert distorted.symmetry_number == 1
    assert elapsed < 5.0


def test_docstring_examples():
    import doctest

    import cationcalc.chem.symmetry

    assert doctest.testmod(cationcalc.chem.symmetry).failed == 0
