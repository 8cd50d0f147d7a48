"""Molecular point groups and rotational symmetry numbers.

:func:`point_group` finds every rotation and rotation-reflection that maps a
molecule onto itself within a distance tolerance, and names the group in
Schoenflies notation. The rotational symmetry number σ used in the
rigid-rotor partition function is the order of the group of proper rotations
(σ = 1 for C∞v, 2 for D∞h, 1 for an atom).

How the operations are found: the molecule is centred on its centroid (a
fixed point of every symmetry operation). Two reference atoms *a* and *b*
are chosen: few possible images (same element, same distance from the
centre), far from the centre, *b* well off the line through *a*. A proper or
improper operation is fixed by where it sends *a* and *b*, so each candidate
image pair (a', b') with the right distance gives one trial matrix; it is
refined by a Kabsch fit over all atoms and kept when every atom lands within
2·``tolerance_angstrom`` of an atom of the same element, each atom used once.
Operations are recorded as (determinant, atom permutation), which makes the
set exactly closed under composition, so noisy geometries still give a
group. The group is accepted when no atom lies farther than
``tolerance_angstrom`` from the symmetrised molecule, and is named from its
element orders (Cn, Dn, T, O, I) and its mirror planes and inversion centre.

Example
-------
>>> import numpy as np
>>> from cationcalc.chem.symmetry import point_group
>>> h = 1.09 / np.sqrt(3.0)
>>> methane = [[0, 0, 0], [h, h, h], [-h, -h, h], [-h, h, -h], [h, -h, -h]]
>>> group = point_group([6, 1, 1, 1, 1], methane)
>>> group.name, group.symmetry_number
('Td', 12)
>>> point_group([8, 1, 1], [[0, 0, 0.12], [0, 0.76, -0.47], [0, -0.76, -0.47]]).name
'C2v'
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

#: largest order of a finite point group (Ih)
_MAX_GROUP_ORDER = 120


@dataclass(frozen=True)
class PointGroup:
    """A molecule's point group.

    ``name`` is the Schoenflies symbol ("C1", "Cs", "C3h", "D7h", "Td",
    "C∞v", "D∞h", "Kh" for an atom). ``symmetry_number`` is the rotational
    symmetry number σ. ``n_proper_rotations`` counts the distinct atom
    permutations brought about by proper rotations (equal to σ, also for
    linear molecules). ``is_chiral`` is True when the molecule has no mirror
    plane, inversion centre or rotation-reflection axis.
    """

    name: str
    symmetry_number: int
    n_proper_rotations: int
    is_chiral: bool


# ----------------------------------------------------------------------------
# small geometry helpers
# ----------------------------------------------------------------------------

def _kabsch(points: np.ndarray, targets: np.ndarray, determinant: int) -> np.ndarray:
    """Orthogonal R with det(R) = ``determinant`` minimising Σ|R p_i − t_i|²."""
    u, _, vt = np.linalg.svd(points.T @ targets)
    d = determinant * np.sign(np.linalg.det(vt.T @ u.T))
    return vt.T @ np.diag([1.0, 1.0, d if d != 0 else 1.0]) @ u.T


def _frame(first: np.ndarray, second: np.ndarray) -> np.ndarray:
    """Orthonormal frame (columns) from two non-collinear vectors."""
    e1 = first / np.linalg.norm(first)
    e2 = second - (second @ e1) * e1
    e2 /= np.linalg.norm(e2)
    return np.column_stack([e1, e2, np.cross(e1, e2)])


def _permutation_order(permutation: np.ndarray) -> int:
    """Order of a permutation: lcm of its cycle lengths."""
    seen = np.zeros(len(permutation), dtype=bool)
    order = 1
    for start in range(len(permutation)):
        if seen[start]:
            continue
        length = 0
        atom = start
        while not seen[atom]:
            seen[atom] = True
            atom = permutation[atom]
            length += 1
        order = order * length // math.gcd(order, length)
    return order


def _operation_order(determinant: int, permutation: np.ndarray) -> int:
    order = _permutation_order(permutation)
    if determinant < 0 and order % 2 == 1:
        order *= 2
    return order


def _axis(matrix: np.ndarray, largest: bool) -> np.ndarray:
    """Rotation axis (eigenvalue +1) or mirror normal (eigenvalue −1)."""
    values, vectors = np.linalg.eigh(0.5 * (matrix + matrix.T))
    return vectors[:, -1] if largest else vectors[:, 0]


# ----------------------------------------------------------------------------
# finding the operations
# ----------------------------------------------------------------------------

class _Matcher:
    """Tests trial matrices against the centred molecule."""

    def __init__(self, labels: np.ndarray, centred: np.ndarray, tolerance: float):
        self.labels = labels
        self.x = centred
        self.tolerance = tolerance
        self.n_atoms = len(labels)
        self.other_element = labels[:, None] != labels[None, :]
        self.squared_norms = np.einsum("ij,ij->i", centred, centred)

    def _nearest(self, matrix: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        moved = self.x @ matrix.T
        squared = (np.einsum("ij,ij->i", moved, moved)[:, None] + self.squared_norms[None, :]
                   - 2.0 * moved @ self.x.T)
        squared[self.other_element] = np.inf
        nearest = np.argmin(squared, axis=1)
        distance = np.sqrt(np.clip(squared[np.arange(self.n_atoms), nearest], 0.0, None))
        return nearest, distance

    def match(self, trial: np.ndarray, determinant: int, loose: float):
        """(permutation, refined matrix) or None."""
        nearest, distance = self._nearest(trial)
        if distance.max() > loose or len(np.unique(nearest)) != self.n_atoms:
            return None
        for _ in range(3):
            matrix = _kabsch(self.x, self.x[nearest], determinant)
            refined, distance = self._nearest(matrix)
            if np.array_equal(refined, nearest):
                break
            nearest = refined
        if distance.max() > self.tolerance or len(np.unique(nearest)) != self.n_atoms:
            return None
        return nearest, matrix


def _reference_atom(eligible: np.ndarray, n_images: np.ndarray, lever: np.ndarray) -> int:
    """Fewest possible images first, then the longest lever arm."""
    indices = np.flatnonzero(eligible)
    best = np.lexsort((-lever[indices], n_images[indices]))[0]
    return int(indices[best])


def _find_operations(labels: np.ndarray, centred: np.ndarray, tolerance: float):
    """All (determinant, permutation, matrix) that map the molecule onto itself.

    An operation is kept when every atom lands within 2·``tolerance`` of an
    atom of its element (two atoms each ``tolerance`` away from a symmetric
    structure can be that far apart).
    """
    pair_tolerance = 2.0 * tolerance
    matcher = _Matcher(labels, centred, pair_tolerance)
    radius = np.linalg.norm(centred, axis=1)
    same_shell = ((~matcher.other_element)
                  & (np.abs(radius[:, None] - radius[None, :]) <= 1.25 * pair_tolerance))
    n_images = same_shell.sum(axis=1)

    far = radius >= max(3.0 * tolerance, 0.35 * radius.max())
    a = _reference_atom(far if far.any() else radius > 0.5 * radius.max(), n_images, radius)
    direction = centred[a] / radius[a]
    off_axis = np.linalg.norm(centred - np.outer(centred @ direction, direction), axis=1)
    wide = off_axis >= max(3.0 * tolerance, 0.35 * off_axis.max())
    b = _reference_atom(wide if wide.any() else off_axis >= 0.5 * off_axis.max(), n_images, off_axis)

    reference_frame = _frame(centred[a], centred[b])
    pair_distances = np.linalg.norm(centred[:, None, :] - centred[None, :, :], axis=2)
    loose = 2.0 * pair_tolerance
    operations: dict[tuple[int, bytes], tuple[int, np.ndarray, np.ndarray]] = {}
    for a_image in np.flatnonzero(same_shell[a]):
        distance_ok = np.abs(pair_distances[a_image] - pair_distances[a, b]) <= 2.0 * pair_tolerance
        for b_image in np.flatnonzero(same_shell[b] & distance_ok):
            if b_image == a_image:
                continue
            image_frame = _frame(centred[a_image], centred[b_image])
            for determinant in (1, -1):
                trial = image_frame @ np.diag([1.0, 1.0, float(determinant)]) @ reference_frame.T
                found = matcher.match(trial, determinant, loose)
                if found is not None:
                    permutation, matrix = found
                    key = (determinant, permutation.tobytes())
                    operations.setdefault(key, (determinant, permutation, matrix))
    identity = np.arange(len(labels))
    operations.setdefault((1, identity.tobytes()), (1, identity, np.eye(3)))
    return _close_group(operations, centred)


def _close_group(operations: dict, centred: np.ndarray):
    """Add all products so that the set is a group; None if it grows too large."""
    elements = list(operations.values())
    pending = list(elements)
    while pending:
        new = []
        for first_det, first_perm, _ in pending:
            for second_det, second_perm, _ in list(operations.values()):
                for det, perm in ((first_det * second_det, second_perm[first_perm]),
                                  (first_det * second_det, first_perm[second_perm])):
                    key = (det, perm.tobytes())
                    if key not in operations:
                        matrix = _kabsch(centred, centred[perm], det)
                        operations[key] = (det, perm, matrix)
                        new.append(operations[key])
                        if len(operations) > _MAX_GROUP_ORDER:
                            return None
        pending = new
    return list(operations.values())


def _largest_deviation_from_symmetric(operations, centred: np.ndarray) -> float:
    """Largest distance of an atom from its position in the symmetrised molecule.

    The symmetrised position of atom i is the average over the group of
    g⁻¹ applied to the atom that g sends i to.
    """
    symmetrised = np.zeros_like(centred)
    for _, permutation, matrix in operations:
        symmetrised += centred[permutation] @ matrix
    symmetrised /= len(operations)
    return float(np.linalg.norm(symmetrised - centred, axis=1).max())


# ----------------------------------------------------------------------------
# naming the group
# ----------------------------------------------------------------------------

def _name_group(operations) -> PointGroup | None:
    proper = [(perm, matrix) for det, perm, matrix in operations if det > 0]
    improper = [(perm, matrix) for det, perm, matrix in operations if det < 0]
    order = len(proper)
    proper_orders = [_operation_order(1, perm) for perm, _ in proper]
    highest = max(proper_orders)

    if highest == order:
        family, n = "C", order
    elif order >= 4 and 2 * highest == order:
        family, n = "D", order // 2
    elif (order, highest) in ((12, 3), (24, 4), (60, 5)):
        family, n = {12: "T", 24: "O", 60: "I"}[order], 0
    else:
        return None

    mirror_normals = []
    has_inversion = False
    for perm, matrix in improper:
        if _operation_order(-1, perm) == 2:
            if np.trace(matrix) > 0.0:
                mirror_normals.append(_axis(matrix, largest=False))
            else:
                has_inversion = True
    principal_axes = [_axis(matrix, largest=True)
                      for (perm, matrix), k in zip(proper, proper_orders) if n >= 2 and k == n]

    def mirror_perpendicular_to_principal_axis() -> bool:
        return any(abs(normal @ axis) > 0.9 for normal in mirror_normals for axis in principal_axes)

    if not improper:
        name = family + (str(n) if n else "")
    elif family == "C" and n == 1:
        name = "Cs" if mirror_normals else "Ci"
    elif family == "C":
        if mirror_perpendicular_to_principal_axis():
            name = f"C{n}h"
        elif mirror_normals:
            name = f"C{n}v"
        else:
            name = f"S{2 * n}"
    elif family == "D":
        name = f"D{n}h" if mirror_perpendicular_to_principal_axis() else f"D{n}d"
    elif family == "T":
        name = "Th" if has_inversion else "Td"
    else:
        name = family + "h"
    return PointGroup(name=name, symmetry_number=order, n_proper_rotations=order,
                      is_chiral=not improper)


# ----------------------------------------------------------------------------
# public functions
# ----------------------------------------------------------------------------

def _linear_group(labels: np.ndarray, centred: np.ndarray, tolerance: float) -> PointGroup:
    inversion = _Matcher(labels, centred, 2.0 * tolerance).match(-np.eye(3), -1, 2.0 * tolerance)
    if inversion is not None:
        permutation, _ = inversion
        if 0.5 * np.linalg.norm(centred + centred[permutation], axis=1).max() <= tolerance:
            return PointGroup("D∞h", 2, 2, False)
    return PointGroup("C∞v", 1, 1, False)


def point_group(numbers: ArrayLike, positions_angstrom: ArrayLike, tolerance_angstrom: float = 0.1) -> PointGroup:
    """Schoenflies point group and rotational symmetry number of a molecule.

    ``numbers`` are atomic numbers (any per-atom labels work, e.g. symbols);
    ``positions_angstrom`` has shape (n_atoms, 3).

    Tolerance: a group is accepted when no atom is farther than
    ``tolerance_angstrom`` from its position in the symmetrised molecule
    (the group average of its images). Operations are searched with twice
    that distance between an atom's image and its partner. If the operations
    found do not pass, the search is repeated with the tolerance tightened
    (×0.7, three times), which falls back to a subgroup, and finally to C1
    with a warning.
    """
    positions = np.asarray(positions_angstrom, dtype=float).reshape(-1, 3)
    _, labels = np.unique(np.asarray(numbers).reshape(-1), return_inverse=True)
    if len(labels) != len(positions):
        raise ValueError("numbers and positions have different lengths")
    if len(positions) == 0:
        raise ValueError("no atoms")
    if len(positions) == 1:
        return PointGroup("Kh", 1, 1, False)

    centred = positions - positions.mean(axis=0)
    _, _, principal = np.linalg.svd(centred, full_matrices=False)
    line = principal[0]
    off_line = np.linalg.norm(centred - np.outer(centred @ line, line), axis=1)
    if off_line.max() <= tolerance_angstrom:
        return _linear_group(labels, centred, tolerance_angstrom)

    tolerance = tolerance_angstrom
    for _ in range(4):
        operations = _find_operations(labels, centred, tolerance)
        if (operations is not None
                and _largest_deviation_from_symmetric(operations, centred) <= tolerance_angstrom):
            group = _name_group(operations)
            if group is not None:
                return group
        tolerance *= 0.7
    warnings.warn("no consistent point group found; using C1", RuntimeWarning, stacklevel=2)
    return PointGroup("C1", 1, 1, True)


def symmetry_number(numbers: ArrayLike, positions_angstrom: ArrayLike, tolerance_angstrom: float = 0.1) -> int:
    """Rotational symmetry number σ (order of the proper-rotation group)."""
    return point_group(numbers, positions_angstrom, tolerance_angstrom).symmetry_number
