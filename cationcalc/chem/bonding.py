"""Bond graphs and the bonding guard.

Carbocations do not always stay what they were drawn as: at GFN2-xTB
1-propyl relaxes to 2-propyl, cyclobutylmethyl ring-expands, 2-butyl bridges.
The guard compares the bond graph of the species asked for (from its SMILES)
with the graph of the optimised geometry (covalent radii × a tolerance
factor) and names every bond that formed or broke, with the SMILES of what
the structure became where RDKit can assign one.

Example
-------
>>> import numpy as np
>>> from cationcalc.chem.bonding import bonds_from_geometry
>>> sorted(bonds_from_geometry([8, 1, 1], np.array([[0, 0, 0], [0, 0.76, 0.59], [0, -0.76, 0.59]])))
[(0, 1), (0, 2)]
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike
from ase.data import chemical_symbols, covalent_radii
from rdkit import Chem, RDLogger

RDLogger.DisableLog("rdApp.*")

#: a pair is bonded when closer than this factor times the sum of covalent radii
#: (Cordero radii as tabulated in ASE; 1.2 keeps a bridging hydrogen at
#: 1.3 Å bonded to both carbons and a 1.7 Å hyperconjugated C–C bonded)
BOND_FACTOR = 1.2


def bonds_from_mol(mol: Chem.Mol) -> frozenset[tuple[int, int]]:
    """Bonds of an RDKit molecule as sorted index pairs."""
    return frozenset(tuple(sorted((b.GetBeginAtomIdx(), b.GetEndAtomIdx()))) for b in mol.GetBonds())


def bonds_from_geometry(numbers: ArrayLike, positions_angstrom: ArrayLike, factor: float = BOND_FACTOR) -> frozenset[tuple[int, int]]:
    """Bonds from interatomic distances and covalent radii."""
    numbers = np.asarray(numbers, dtype=int)
    pos = np.asarray(positions_angstrom, dtype=float)
    radii = covalent_radii[numbers]
    dist = np.linalg.norm(pos[:, None, :] - pos[None, :, :], axis=-1)
    cutoff = factor * (radii[:, None] + radii[None, :])
    i, j = np.nonzero(np.triu(dist < cutoff, k=1))
    return frozenset((int(a), int(b)) for a, b in zip(i, j))


@dataclass(frozen=True)
class BondingChange:
    """Bonds formed and broken between the species asked for and a geometry."""

    formed: tuple[tuple[int, int], ...] = ()
    broken: tuple[tuple[int, int], ...] = ()
    relaxed_smiles: str | None = None
    bridged_atoms: tuple[int, ...] = field(default=())

    @property
    def changed(self) -> bool:
        return bool(self.formed or self.broken)

    def describe(self, numbers: ArrayLike) -> str:
        def label(pair):
            a, b = pair
            return f"{chemical_symbols[numbers[a]]}{a}-{chemical_symbols[numbers[b]]}{b}"

        parts = []
        if self.broken:
            parts.append("broke " + ", ".join(label(p) for p in self.broken))
        if self.formed:
            parts.append("formed " + ", ".join(label(p) for p in self.formed))
        text = "; ".join(parts)
        if self.bridged_atoms:
            text += "; bridged: " + ", ".join(
                f"{chemical_symbols[numbers[a]]}{a} bonded to both ends" for a in self.bridged_atoms)
        if self.relaxed_smiles:
            text += f"; became {self.relaxed_smiles}"
        return text


def _mol_from_bonds(numbers, bonds, positions=None, cap: int | None = None) -> Chem.RWMol:
    """Single-bonded RDKit molecule from a bond list (optionally a hydride cap on atom ``cap``)."""
    mol = Chem.RWMol()
    for z in numbers:
        atom = Chem.Atom(int(z))
        atom.SetNoImplicit(True)
        mol.AddAtom(atom)
    for a, b in bonds:
        mol.AddBond(int(a), int(b), Chem.BondType.SINGLE)
    coords = np.zeros((len(numbers), 3)) if positions is None else np.asarray(positions, dtype=float)
    if cap is not None:
        mol.AddBond(cap, mol.AddAtom(Chem.Atom(1)), Chem.BondType.SINGLE)
        coords = np.vstack([coords, coords[cap] + [0.0, 0.0, 1.1]])
    conf = Chem.Conformer(mol.GetNumAtoms())
    for i, p in enumerate(coords):
        conf.SetAtomPosition(i, p.tolist())
    mol.AddConformer(conf, assignId=True)
    return mol


def _closed_shell_smiles(mol: Chem.Mol, charge: int) -> str | None:
    """Assign bond orders in place; the SMILES if the result is closed-shell, else None."""
    from rdkit.Chem import rdDetermineBonds

    for charged_fragments in (charge != 0, True):
        trial = Chem.Mol(mol)
        try:
            rdDetermineBonds.DetermineBondOrders(trial, charge=int(charge), allowChargedFragments=charged_fragments,
                                                 embedChiral=False)
            if any(a.GetNumRadicalElectrons() for a in trial.GetAtoms()):
                continue
            Chem.SanitizeMol(trial)
        except Exception:
            continue
        for bond in trial.GetBonds():
            mol.GetBondBetweenAtoms(bond.GetBeginAtomIdx(), bond.GetEndAtomIdx()).SetBondType(bond.GetBondType())
        for atom in trial.GetAtoms():
            mol.GetAtomWithIdx(atom.GetIdx()).SetFormalCharge(atom.GetFormalCharge())
        return Chem.MolToSmiles(Chem.RemoveHs(trial))
    return None


def smiles_from_geometry(numbers: ArrayLike, positions_angstrom: ArrayLike, charge: int, factor: float = BOND_FACTOR) -> str | None:
    """Closed-shell SMILES for a geometry with a given net charge, or None.

    Connectivity comes from covalent radii; bond orders from RDKit.  For a
    monocation every carbon short of four bonds is tried as the carbenium
    centre (by capping it with a hydride, assigning bond orders to the neutral
    and removing the cap), which avoids the radical/carbene forms a direct
    assignment can give; the form with the fewest charged atoms, then the most
    aromatic atoms, then the canonical-first SMILES is returned.
    """
    bonds = bonds_from_geometry(numbers, positions_angstrom, factor)
    if charge != 1:
        return _closed_shell_smiles(_mol_from_bonds(numbers, bonds, positions_angstrom).GetMol(), charge)
    degree = np.zeros(len(numbers), dtype=int)
    for a, b in bonds:
        degree[a] += 1
        degree[b] += 1
    forms = []
    for centre in range(len(numbers)):
        if numbers[centre] != 6 or degree[centre] >= 4:
            continue
        probe = _mol_from_bonds(numbers, bonds, positions_angstrom, cap=centre).GetMol()
        if _closed_shell_smiles(probe, 0) is None:
            continue
        cation = _mol_from_bonds(numbers, bonds, positions_angstrom)
        for bond in probe.GetBonds():
            a, b = bond.GetBeginAtomIdx(), bond.GetEndAtomIdx()
            if a < len(numbers) and b < len(numbers):
                cation.GetBondBetweenAtoms(a, b).SetBondType(bond.GetBondType())
        for atom in probe.GetAtoms():
            if atom.GetIdx() < len(numbers):
                cation.GetAtomWithIdx(atom.GetIdx()).SetFormalCharge(atom.GetFormalCharge())
        cation.GetAtomWithIdx(centre).SetFormalCharge(1)
        try:
            mol = cation.GetMol()
            Chem.SanitizeMol(mol)
            mol = Chem.RemoveHs(mol)
            n_aromatic = sum(a.GetIsAromatic() for a in mol.GetAtoms())
            n_charged = sum(a.GetFormalCharge() != 0 for a in mol.GetAtoms())
            forms.append((n_charged, -n_aromatic, Chem.MolToSmiles(mol)))
        except Exception:
            continue
    return sorted(forms)[0][-1] if forms else None


def compare_bonding(reference: frozenset, numbers: ArrayLike, positions_angstrom: ArrayLike, charge: int,
                    factor: float = BOND_FACTOR) -> BondingChange:
    """What changed between the reference bond graph and the geometry's."""
    found = bonds_from_geometry(numbers, positions_angstrom, factor)
    formed = tuple(sorted(found - reference))
    broken = tuple(sorted(reference - found))
    if not formed and not broken:
        return BondingChange()
    # an atom (usually H) with more bonds now than in the species asked for, to two
    # atoms that are themselves bonded, bridges them
    degree_now: dict[int, list[int]] = {}
    for a, b in found:
        degree_now.setdefault(a, []).append(b)
        degree_now.setdefault(b, []).append(a)
    max_partners = {1: 1, 6: 4}
    bridged = [a for a, partners in degree_now.items()
               if numbers[a] in max_partners and len(partners) > max_partners[numbers[a]]
               and any(p for p in formed if a in p)]
    relaxed = None if bridged else smiles_from_geometry(numbers, positions_angstrom, charge)
    return BondingChange(formed, broken, relaxed, tuple(sorted(bridged)))


def positions_in_atom_order(mol: Chem.Mol, numbers: ArrayLike, positions_angstrom: ArrayLike,
                            factor: float = BOND_FACTOR) -> np.ndarray | None:
    """``positions_angstrom`` reordered to the atom order of ``mol`` (hydrogens explicit), or None.

    The geometry's bond graph (covalent radii) must be the molecule's: the same
    structure written with another atom numbering, e.g. a shift product that
    relaxed back into its parent.  Bond orders and charges play no part.

    >>> water = Chem.AddHs(Chem.MolFromSmiles("O"))
    >>> positions_in_atom_order(water, [1, 8, 1], [[0, 0.76, 0.59], [0, 0, 0], [0, -0.76, 0.59]])[0].tolist()
    [0.0, 0.0, 0.0]
    """
    numbers = [int(z) for z in numbers]
    pos = np.asarray(positions_angstrom, dtype=float)
    if sorted(numbers) != sorted(a.GetAtomicNum() for a in mol.GetAtoms()):
        return None
    bonds = bonds_from_geometry(numbers, pos, factor)
    if len(bonds) != mol.GetNumBonds():
        return None
    graph = _mol_from_bonds(numbers, bonds).GetMol()
    query = _mol_from_bonds([a.GetAtomicNum() for a in mol.GetAtoms()], bonds_from_mol(mol)).GetMol()
    for m in (graph, query):
        m.UpdatePropertyCache(strict=False)
        Chem.FastFindRings(m)
    match = graph.GetSubstructMatch(query)  # match[i]: the geometry's atom that is atom i of mol
    if len(match) != mol.GetNumAtoms():
        return None
    return pos[list(match)]
