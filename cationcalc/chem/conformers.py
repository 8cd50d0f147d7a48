"""Conformer ensembles from RDKit ETKDGv3 with a force-field clean-up.

The number of embedded conformers grows with the number of rotatable bonds
(``base + per_rotor × n_rot``, capped at ``max_conformers``), the seed is
fixed so that runs are reproducible, and near-duplicates are pruned by
heavy-atom RMSD during embedding.  Geometries are then cleaned with a force
field where one fits: MMFF94 for species without a cationic carbon (MMFF
types a carbenium carbon as a neutral alkene carbon, so it is never used on
cations), UFF otherwise, and none when neither has parameters.  Force-field
energies are never used to rank conformers: that is GFN2-xTB's job.

Example
-------
>>> from cationcalc.chem.conformers import ConformerSettings, embed_conformers
>>> mol, geometries = embed_conformers("CCCC", ConformerSettings())
>>> len(geometries) >= 2, geometries[0].shape
(True, (14, 3))
"""

from __future__ import annotations

import numpy as np
from pydantic import BaseModel, ConfigDict, Field
from rdkit import Chem
from rdkit.Chem import AllChem, rdMolDescriptors, rdMolTransforms


class ConformerSettings(BaseModel):
    """How conformers are generated and how many reach GFN2-xTB optimisation."""

    model_config = ConfigDict(frozen=True, extra="forbid")

    base: int = Field(4, ge=1, description="conformers embedded for a rigid molecule")
    per_rotor: int = Field(4, ge=0, description="extra conformers per rotatable bond")
    max_conformers: int = Field(30, ge=1, description="cap on embedded conformers")
    prune_rms_angstrom: float = Field(0.1, ge=0.0, description="all-atom RMSD pruning at embedding (0: none)")
    seed: int = Field(20261202, description="ETKDG random seed (fixed: runs are reproducible)")
    n_optimize: int = Field(3, ge=1, description="lowest single-point conformers optimised with GFN2-xTB")
    window_kcal_mol: float = Field(3.0, ge=0.0, description="energy window of the Boltzmann ensemble")
    centre_torsion_steps: int = Field(
        3, ge=0, le=11, description="carbocations: extra starting structures for each open-chain bond from the "
        "cationic carbon to an sp3 carbon, turned by 1..n equal steps of 120°/(n+1) from the first embedded conformers (the "
        "alignment of a neighbouring C–C or C–H bond with the empty p orbital decides hyperconjugation); 0: none. "
        "Default 3: halves the benchmark sets' conformer misses (> 0.5 kcal/mol: 6 → 3 of 49) at the same wall "
        "time (benchmarks/conformer_misses.py)")

    def count_for(self, n_rotatable: int) -> int:
        return max(1, min(self.max_conformers, self.base + self.per_rotor * n_rotatable))


def with_hydrogens(smiles: str) -> Chem.Mol:
    """The RDKit molecule with explicit hydrogens (atom order used everywhere after)."""
    mol = Chem.MolFromSmiles(smiles)
    return Chem.AddHs(mol)


def _has_cationic_carbon(mol: Chem.Mol) -> bool:
    return any(a.GetSymbol() == "C" and a.GetFormalCharge() > 0 for a in mol.GetAtoms())


def _force_field_clean(mol: Chem.Mol, conf_ids) -> str:
    """Relax embedded geometries with MMFF94 or UFF in place; returns the field used."""
    try:
        if not _has_cationic_carbon(mol) and AllChem.MMFFHasAllMoleculeParams(mol):
            AllChem.MMFFOptimizeMoleculeConfs(mol, numThreads=1, maxIters=500)
            return "MMFF94"
        if AllChem.UFFHasAllMoleculeParams(mol):
            AllChem.UFFOptimizeMoleculeConfs(mol, numThreads=1, maxIters=500)
            return "UFF"
    except Exception:  # a force-field failure only means no clean-up
        pass
    return "none"


def embed_conformers(smiles: str, settings: ConformerSettings = ConformerSettings()) -> tuple[Chem.Mol, list[np.ndarray]]:
    """Embed and clean conformers; returns the H-complete molecule and geometries (Å)."""
    mol = with_hydrogens(smiles)
    n_atoms = mol.GetNumAtoms()
    if n_atoms == 1:
        return mol, [np.zeros((1, 3))]
    heavy = Chem.RemoveHs(mol)
    n_rot = rdMolDescriptors.CalcNumRotatableBonds(heavy)
    params = AllChem.ETKDGv3()
    params.randomSeed = int(settings.seed)
    params.pruneRmsThresh = float(settings.prune_rms_angstrom)
    params.numThreads = 1
    # hydrogens count in the pruning RMSD: in a cation the orientation of a C–H next to the
    # centre (hyperconjugation) decides the energy, and heavy-atom RMSD cannot see it
    params.onlyHeavyAtomsForRMS = False
    params.useRandomCoords = n_atoms > 60
    conf_ids = list(AllChem.EmbedMultipleConfs(mol, numConfs=settings.count_for(n_rot), params=params))
    if not conf_ids:
        params.useRandomCoords = True
        conf_ids = list(AllChem.EmbedMultipleConfs(mol, numConfs=settings.count_for(n_rot), params=params))
    if conf_ids:
        _force_field_clean(mol, conf_ids)
        geometries = [np.array(mol.GetConformer(cid).GetPositions(), dtype=float) for cid in conf_ids]
        return mol, geometries + centre_torsion_seeds(mol, conf_ids, settings.centre_torsion_steps)
    # a planar carbenium centre inside a cage (1-adamantyl, bridgehead cations) defeats the
    # embedding's sp2 constraints: embed the hydride adduct and take the extra hydrogen away
    geometries = _embed_through_adduct(mol, settings.count_for(n_rot), params)
    if not geometries:
        raise RuntimeError(f"RDKit could not embed 3-D coordinates for {smiles!r}")
    return mol, geometries


#: embedded conformers that the centre torsion seeds start from
TORSION_SEED_BASES = 2


def centre_torsion_seeds(mol: Chem.Mol, conf_ids: list[int], steps: int) -> list[np.ndarray]:
    """Rigid rotations about each open-chain bond from a cationic carbon to an sp3 carbon: ``steps`` turns of 120°/(steps+1).

    Only sp3 neighbours are turned: their C–C and C–H bonds hyperconjugate with the empty p orbital, and
    which one lines up with it is what the embedding gets wrong.  A bond to an aryl, vinyl or heteroatom
    neighbour is a π bond in part (benzylic, allylic, oxocarbenium ions); turning it only breaks the
    conjugation, and the turned structures, ranked by single point, took the optimisation budget of an
    oxocarbenium ion (MeO–CH⁺–aryl) from better starts and left it 3.6 kcal/mol high (benchmarks/druglike.py).

    >>> mol = with_hydrogens("CC[C+](C)C")
    >>> ids = list(AllChem.EmbedMultipleConfs(mol, numConfs=1, randomSeed=7))
    >>> len(centre_torsion_seeds(mol, ids, 3))  # three bonds to sp3 carbons, three turns each
    9
    >>> benzylic = with_hydrogens("CO[CH+]c1ccccc1")
    >>> centre_torsion_seeds(benzylic, list(AllChem.EmbedMultipleConfs(benzylic, numConfs=1, randomSeed=7)), 3)
    []
    """
    if steps <= 0:
        return []
    dihedrals = []
    for centre in cationic_carbons(mol):
        for bond in centre.GetBonds():
            other = bond.GetOtherAtom(centre)
            if (bond.IsInRing() or bond.GetBondType() != Chem.BondType.SINGLE or other.GetDegree() < 2
                    or other.GetSymbol() != "C" or other.GetHybridization() != Chem.HybridizationType.SP3):
                continue  # only an sp3 neighbour has a C–C/C–H bond to align: π neighbours want the plane
            i = next((n.GetIdx() for n in centre.GetNeighbors() if n.GetIdx() != other.GetIdx()), None)
            l_ = next((n.GetIdx() for n in other.GetNeighbors() if n.GetIdx() != centre.GetIdx()), None)
            if i is not None and l_ is not None:
                dihedrals.append((i, centre.GetIdx(), other.GetIdx(), l_))
    seeds = []
    for cid in list(conf_ids)[:TORSION_SEED_BASES]:
        for quad in dihedrals:
            start = rdMolTransforms.GetDihedralDeg(mol.GetConformer(cid), *quad)
            for k in range(1, steps + 1):
                turned = Chem.Mol(mol, confId=cid)  # a copy holding this conformer only
                conf = turned.GetConformer()
                rdMolTransforms.SetDihedralDeg(conf, *quad, start + k * 120.0 / (steps + 1))
                seeds.append(np.array(conf.GetPositions(), dtype=float))
    return seeds


def cationic_carbons(mol: Chem.Mol) -> list[Chem.Atom]:
    """The carbons of formal charge +1 (the carbenium centres)."""
    return [a for a in mol.GetAtoms() if a.GetSymbol() == "C" and a.GetFormalCharge() == 1]


def has_cationic_carbon(smiles: str) -> bool:
    """True when the species has a carbon of formal charge +1: the only species the torsion seeds touch.

    >>> has_cationic_carbon("CC[C+](C)C"), has_cationic_carbon("CC(C)(C)Cl"), has_cationic_carbon("C[N+](C)(C)C")
    (True, False, False)
    """
    mol = Chem.MolFromSmiles(smiles)
    return mol is not None and bool(cationic_carbons(mol))


def _embed_through_adduct(mol: Chem.Mol, count: int, params) -> list[np.ndarray]:
    centres = [a.GetIdx() for a in cationic_carbons(mol)]
    if len(centres) != 1:
        return []
    adduct = Chem.RWMol(mol)
    centre = adduct.GetAtomWithIdx(centres[0])
    centre.SetFormalCharge(0)
    hydrogen = adduct.AddAtom(Chem.Atom(1))
    adduct.AddBond(centres[0], hydrogen, Chem.BondType.SINGLE)
    adduct = adduct.GetMol()
    Chem.SanitizeMol(adduct)
    conf_ids = list(AllChem.EmbedMultipleConfs(adduct, numConfs=count, params=params))
    _force_field_clean(adduct, conf_ids)
    n = mol.GetNumAtoms()
    return [np.array(adduct.GetConformer(cid).GetPositions(), dtype=float)[:n] for cid in conf_ids]


def count_rotatable_bonds(smiles: str) -> int:
    return rdMolDescriptors.CalcNumRotatableBonds(Chem.MolFromSmiles(smiles))
