"""1,2-shifts of a carbenium ion as graph edits (RDKit only, nothing computed).

A hydrogen, an alkyl group, an aryl or vinyl group, or a ring bond moves
from a β-carbon to the cationic carbon and the charge moves to that
β-carbon.  Products are canonicalised through
:func:`~cationcalc.chem.species.carbocation` and de-duplicated by canonical
SMILES; defined stereocentres are kept (the migrating group keeps its
configuration, the new cationic carbon loses its own).  Skipped, with the
reason reported by :func:`skipped_shifts`: a β-atom that is not carbon (the
charge would land on O, N, S ...), a β-carbon that is sp2/sp or joined to
the centre by a multiple bond (the shift would make a vinyl or aryl cation),
a migrating heteroatom (out of scope), and a group already bonded to the
centre (a three-membered ring).  Only the centre as written is enumerated,
not other resonance positions of a delocalised cation.

Example
-------
>>> from cationcalc.chem.shift_graph import enumerate_shifts
>>> [(s.kind, s.group, s.product_smiles) for s in enumerate_shifts("[CH2+]C(C)(C)C")]
[('alkyl', 'CH3', 'CC[C+](C)C')]
>>> sorted(s.kind for s in enumerate_shifts("[CH2+]C1CCC1"))
['hydride', 'ring']
"""

from __future__ import annotations

from dataclasses import dataclass

from rdkit import Chem
from rdkit.Chem.rdMolDescriptors import CalcMolFormula

from cationcalc.chem.species import Carbocation, InputError, carbocation, freeze_hydrogens

KINDS = ("hydride", "alkyl", "aryl", "ring")


@dataclass(frozen=True)
class ShiftCandidate:
    """One 1,2-shift of a carbenium ion.

    Atom indices refer to the heavy atoms of the parent's canonical SMILES
    (``parent_smiles``, the order of ``Chem.MolFromSmiles(parent_smiles)``);
    ``migrating_atom`` is the migrating carbon, or for a hydride the first
    hydrogen on the β-carbon in ``Chem.AddHs`` order (any of them moves).
    ``kind`` is ``hydride``, ``alkyl``, ``aryl`` (any sp2/sp carbon group:
    aryl, vinyl, alkynyl) or ``ring`` (a ring C–C bond of the β-carbon
    migrates: ring expansion or contraction).
    """

    kind: str
    from_atom: int
    to_atom: int
    migrating_atom: int
    group: str
    parent_smiles: str
    product_smiles: str

    @property
    def degenerate(self) -> bool:
        return self.product_smiles == self.parent_smiles


def enumerate_shifts(cation_smiles: str) -> list[ShiftCandidate]:
    """Every distinct 1,2-shift product of a carbenium ion (pure graph work, no computation).

    >>> [s.product_smiles for s in enumerate_shifts("C[CH+]CC") if s.kind == "alkyl"]
    ['[CH2+]C(C)C']
    """
    return _enumerate(cation_smiles)[1]


def skipped_shifts(cation_smiles: str) -> list[str]:
    """Why shifts a chemist might expect were not enumerated (one line each)."""
    return _enumerate(cation_smiles)[2]


# ---------------------------------------------------------------------------------------------
# which shifts
# ---------------------------------------------------------------------------------------------

def _unsaturated(atom: Chem.Atom) -> bool:
    return atom.GetIsAromatic() or any(b.GetBondType() != Chem.BondType.SINGLE for b in atom.GetBonds())


def _group_formula(mol: Chem.Mol, beta: int, group: int) -> str:
    """Formula of the group cut off at the β–group bond (acyclic groups only)."""
    rw = Chem.RWMol(mol)
    rw.RemoveBond(beta, group)
    frags = Chem.GetMolFrags(rw, asMols=False, sanitizeFrags=False)
    atoms = next(f for f in frags if group in f)
    piece = Chem.RWMol(Chem.Mol(mol))
    for idx in sorted((i for i in range(mol.GetNumAtoms()) if i not in atoms), reverse=True):
        piece.RemoveAtom(idx)
    return CalcMolFormula(piece.GetMol()) if piece.GetNumAtoms() else "?"


def _enumerate(cation_smiles: str) -> tuple[Carbocation, list[ShiftCandidate], list[str]]:
    """(the cation, its distinct shifts, why others were not enumerated)."""
    cation = cation_smiles if isinstance(cation_smiles, Carbocation) else carbocation(cation_smiles, force=True)
    mol = Chem.MolFromSmiles(cation.smiles)
    centre = mol.GetAtomWithIdx(cation.centre)
    out: dict[str, ShiftCandidate] = {}
    skipped: list[str] = []
    if _unsaturated(centre):
        skipped.append(f"C{cation.centre}: the cationic carbon is part of a π system (vinyl, allyl or aromatic "
                       "cation as written); shifts onto it across the π bond are not enumerated")
    for bond in centre.GetBonds():
        beta = bond.GetOtherAtom(centre)
        reason = _beta_out_of_scope(bond, beta)
        if reason:
            skipped.append(reason)
            continue
        shifts, reasons = _shifts_from(mol, cation, beta)
        skipped += reasons
        for shift in shifts:
            # distinct products once each; degenerate shifts once per kind (a hydride and a
            # Wagner–Meerwein shift of 2-norbornyl both return the same ion but are different events)
            key = f"{shift.product_smiles} {shift.kind}" if shift.degenerate else shift.product_smiles
            out.setdefault(key, shift)
    return cation, list(out.values()), skipped


def _beta_out_of_scope(bond: Chem.Bond, beta: Chem.Atom) -> str | None:
    """Why no shift starts at this β-atom, or None when it is an sp3 carbon."""
    b_label = f"{beta.GetSymbol()}{beta.GetIdx()}"
    if beta.GetSymbol() != "C":
        return (f"{b_label}: a shift from a β-{beta.GetSymbol()} would put the charge on "
                f"{beta.GetSymbol()} (hetero-β shifts are out of scope)")
    if bond.GetBondType() != Chem.BondType.SINGLE or _unsaturated(beta):
        return f"{b_label}: sp2/sp β-carbon; a shift from it would leave a vinyl or aryl cation"
    if beta.GetFormalCharge() != 0:
        return f"{b_label}: charged β-carbon"
    return None


def _moves(mol: Chem.Mol, with_h: Chem.Mol, centre: int, beta: Chem.Atom) -> tuple[list[tuple], list[str]]:
    """What can move from ``beta`` to the centre: (group atom or None for H, kind, label), and what cannot."""
    b_label, c_label = f"{beta.GetSymbol()}{beta.GetIdx()}", f"C{centre}"
    moves: list[tuple[int | None, str, str]] = []
    skipped: list[str] = []
    if beta.GetTotalNumHs() > 0:
        moves.append((None, "hydride", "H"))
    for gbond in beta.GetBonds():
        group = gbond.GetOtherAtom(beta)
        if group.GetIdx() == centre:
            continue
        g_label = f"{group.GetSymbol()}{group.GetIdx()}"
        if group.GetSymbol() != "C":
            skipped.append(f"{b_label}→{c_label}: migration of {g_label} (a heteroatom group) is out of scope")
            continue
        if mol.GetBondBetweenAtoms(group.GetIdx(), centre) is not None:
            skipped.append(f"{b_label}→{c_label}: {g_label} is already bonded to the cationic carbon "
                           "(three-membered ring)")
            continue
        if gbond.IsInRing():
            kind, label = "ring", f"ring bond C{beta.GetIdx()}-C{group.GetIdx()}"
        else:
            kind = "aryl" if _unsaturated(group) else "alkyl"
            label = _group_formula(with_h, beta.GetIdx(), group.GetIdx())
        moves.append((group.GetIdx(), kind, label))
    return moves, skipped


def _shifts_from(mol: Chem.Mol, cation: Carbocation, beta: Chem.Atom) -> tuple[list[ShiftCandidate], list[str]]:
    """The shifts from one sp3 β-carbon to the centre, and why others from it were not enumerated."""
    with_h = Chem.AddHs(mol)
    centre = cation.centre
    moves, skipped = _moves(mol, with_h, centre, beta)
    shifts = []
    for group, kind, label in moves:
        try:
            product = shift_product(mol, centre, beta.GetIdx(), group)
        except (InputError, ValueError, RuntimeError) as exc:
            skipped.append(f"{beta.GetSymbol()}{beta.GetIdx()}→C{centre}: {label} shift gives no valid cation ({exc})")
            continue
        if group is None:
            migrating = min(n.GetIdx() for n in with_h.GetAtomWithIdx(beta.GetIdx()).GetNeighbors()
                            if n.GetAtomicNum() == 1)
        else:
            migrating = group
        shifts.append(ShiftCandidate(kind, beta.GetIdx(), centre, migrating, label, cation.smiles, product))
    return shifts, skipped


# ---------------------------------------------------------------------------------------------
# the product of one shift
# ---------------------------------------------------------------------------------------------

#: every double-bond configuration as cis/trans to its stereo atoms (E = trans, Z = cis: RDKit takes
#: the CIP-highest neighbours as stereo atoms when it perceives E/Z)
_RELATIVE_STEREO = {Chem.BondStereo.STEREOE: Chem.BondStereo.STEREOTRANS,
                    Chem.BondStereo.STEREOZ: Chem.BondStereo.STEREOCIS,
                    Chem.BondStereo.STEREOCIS: Chem.BondStereo.STEREOCIS,
                    Chem.BondStereo.STEREOTRANS: Chem.BondStereo.STEREOTRANS}


def shift_product(mol: Chem.Mol, centre: int, beta: int, group: int | None) -> str:
    """Canonical SMILES of the cation after ``group`` (None: a hydrogen) moves from beta to centre.

    Stereo: a migrating stereocentre keeps its configuration (its bond to the
    β-carbon becomes a bond to the centre in the same place), so its chiral
    tag is flipped when the edit permutes its neighbour list oddly; double
    bonds keep their cis/trans relation (the β-carbon, where it was a stereo
    reference, is replaced by the centre); the new cation centre and the old
    centre lose any tag.
    """
    rw = Chem.RWMol(mol)
    freeze_hydrogens(rw)
    stereo_bonds = _double_bond_stereo(rw, centre, beta, group)
    c_atom, b_atom = rw.GetAtomWithIdx(centre), rw.GetAtomWithIdx(beta)
    if group is None:
        b_atom.SetNumExplicitHs(b_atom.GetNumExplicitHs() - 1)
        c_atom.SetNumExplicitHs(c_atom.GetNumExplicitHs() + 1)
    else:
        _move_group(rw, centre, beta, group)
    c_atom.SetFormalCharge(0)
    b_atom.SetFormalCharge(1)
    b_atom.SetChiralTag(Chem.ChiralType.CHI_UNSPECIFIED)
    c_atom.SetChiralTag(Chem.ChiralType.CHI_UNSPECIFIED)
    _restore_double_bond_stereo(rw, stereo_bonds)
    product = rw.GetMol()
    Chem.SanitizeMol(product)
    Chem.SetDoubleBondNeighborDirections(product)
    Chem.AssignStereochemistry(product, cleanIt=True, force=True)
    return carbocation(Chem.MolToSmiles(product), force=True).smiles


def _double_bond_stereo(rw: Chem.RWMol, centre: int, beta: int, group: int | None) -> list[tuple]:
    """((begin, end), stereo atoms after the shift, cis/trans) of every double bond with a configuration."""
    stereo_bonds = []
    for bond in rw.GetBonds():
        if bond.GetStereo() in _RELATIVE_STEREO and len(bond.GetStereoAtoms()) == 2:
            ends = list(bond.GetStereoAtoms())
            if group is not None and group in (bond.GetBeginAtomIdx(), bond.GetEndAtomIdx()):
                ends = [centre if a == beta else a for a in ends]
            stereo_bonds.append(((bond.GetBeginAtomIdx(), bond.GetEndAtomIdx()), ends,
                                 _RELATIVE_STEREO[bond.GetStereo()]))
    return stereo_bonds


def _move_group(rw: Chem.RWMol, centre: int, beta: int, group: int) -> None:
    """Rebond ``group`` from beta to centre; a migrating stereocentre keeps its configuration."""
    g_atom = rw.GetAtomWithIdx(group)
    before = [centre if n.GetIdx() == beta else n.GetIdx() for n in g_atom.GetNeighbors()]
    rw.RemoveBond(beta, group)
    rw.AddBond(centre, group, Chem.BondType.SINGLE)
    g_atom = rw.GetAtomWithIdx(group)
    after = [n.GetIdx() for n in g_atom.GetNeighbors()]
    tag = g_atom.GetChiralTag()
    if tag in (Chem.ChiralType.CHI_TETRAHEDRAL_CW, Chem.ChiralType.CHI_TETRAHEDRAL_CCW) \
            and _permutation_is_odd(before, after):
        g_atom.SetChiralTag(Chem.ChiralType.CHI_TETRAHEDRAL_CW if tag == Chem.ChiralType.CHI_TETRAHEDRAL_CCW
                            else Chem.ChiralType.CHI_TETRAHEDRAL_CCW)


def _permutation_is_odd(before: list[int], after: list[int]) -> bool:
    perm = [before.index(x) for x in after]
    odd, seen = False, set()
    for start in range(len(perm)):
        length, j = 0, start
        while j not in seen:
            seen.add(j)
            j = perm[j]
            length += 1
        if length and length % 2 == 0:
            odd = not odd
    return odd


def _restore_double_bond_stereo(rw: Chem.RWMol, stereo_bonds: list[tuple]) -> None:
    """Clear every bond direction and stereo flag, then set each double bond's cis/trans back."""
    for bond in rw.GetBonds():
        bond.SetBondDir(Chem.BondDir.NONE)
        bond.SetStereo(Chem.BondStereo.STEREONONE)
    for (begin, end), ends, kind in stereo_bonds:
        bond = rw.GetBondBetweenAtoms(begin, end)
        try:
            bond.SetStereoAtoms(*ends)
            bond.SetStereo(kind)
        except RuntimeError:
            bond.SetStereo(Chem.BondStereo.STEREONONE)


__all__ = ["ShiftCandidate", "enumerate_shifts", "skipped_shifts", "shift_product", "KINDS"]
