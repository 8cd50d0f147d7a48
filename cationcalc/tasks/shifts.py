"""1,2-shifts of carbocations: enumeration, driving forces, cascades, relaxation.

A carbocation that rearranges before it is captured gives the wrong product.
This module answers, for one carbenium ion, which 1,2-shifts lead to a more
stable cation, by how much, and where a sequence of shifts ends:

* :func:`enumerate_shifts` is pure graph work (RDKit): a hydrogen, an alkyl
  group, an aryl or vinyl group, or a ring bond moves from a β-carbon to the
  cationic carbon and the charge moves to that β-carbon.  Products are
  canonicalised through :func:`~cationcalc.chem.species.carbocation` and
  de-duplicated by canonical SMILES; defined stereocentres are kept (the
  migrating group keeps its configuration, the new cationic carbon loses
  its own).  Skipped, with the reason reported by :func:`skipped_shifts`:
  a β-atom that is not carbon (the charge would land on O, N, S ...), a
  β-carbon that is sp2/sp or joined to the centre by a multiple bond (the
  shift would make a vinyl or aryl cation), a migrating heteroatom (out of
  scope), and a group already bonded to the centre (a three-membered ring).
  Only the centre as written is enumerated, not other resonance positions
  of a delocalised cation.
* :class:`ShiftSearch` is the cascade: best-first over shift products
  (bounded depth, bounded number of species, no revisits), every product
  computed exactly like the parent (same conformer search, optimisation and
  thermochemistry).  A product is expanded only while its G is at most
  ``ceiling`` above the parent's, so paths may climb through uphill
  intermediates.  A product that is not a minimum (the core's bonding guard
  sees every conformer change its bonds) is a barrierless onward step to
  the structure it relaxed to; the energies it carries are those of that
  relaxed structure.  The sink is the most stable minimum reached; the path
  to it is the one whose highest point is lowest, and that highest point
  (relative to the parent) is a lower bound to the barrier of the cascade.
* :func:`run_shifts` turns inputs into records (one per input, order kept);
  with ``barriers=True`` each flagged and each degenerate shift of the
  parent gets an NEB barrier (:mod:`cationcalc.compute.barriers`).

The driving force of a shift is ΔG(product − parent), exact isomers, so no
reference species enters.  A shift is *flagged* (a likely rearrangement)
when ΔG < −``threshold_kcal_mol``.  Degenerate shifts (product SMILES equal
to the parent's) get ΔE = ΔH = ΔG = 0 from identity and are never flagged.

Example
-------
>>> from cationcalc.tasks.shifts import enumerate_shifts
>>> [(s.kind, s.group, s.product_smiles) for s in enumerate_shifts("[CH2+]C(C)(C)C")]
[('alkyl', 'CH3', 'CC[C+](C)C')]
>>> sorted(s.kind for s in enumerate_shifts("[CH2+]C1CCC1"))
['hydride', 'ring']
"""

from __future__ import annotations

import heapq
import re
from dataclasses import dataclass
from typing import Callable, Iterable

from rdkit import Chem
from rdkit.Chem.rdMolDescriptors import CalcMolFormula

from cationcalc.chem import units
from cationcalc.execution.executors import Interrupted, SpeciesFailure, compute_many
from cationcalc.compute.models import Settings, SpeciesResult
from cationcalc.chem.species import Carbocation, InputError, Species, carbocation
from cationcalc.tasks.records import BatchInterrupted, record_base, species_profile
from cationcalc.tasks.record_types import typed_records

#: ΔG (kcal/mol) below −threshold flags a shift as a likely rearrangement (1 kcal/mol:
#: about 1.7 RT at 298 K, i.e. > 80 % product at equilibrium, and above the spread of
#: conformer-ensemble free energies between repeated runs)
DEFAULT_THRESHOLD_KCAL_MOL = 1.0
#: a cascade may pass through intermediates up to this much above the parent (kcal/mol);
#: 25 kcal/mol keeps secondary→primary steps (about 15–20 kcal/mol uphill) in reach
DEFAULT_CEILING_KCAL_MOL = 25.0
#: longest shift sequence searched (barrierless relaxations do not count)
DEFAULT_DEPTH = 3
#: at most this many distinct cations computed per input (relaxation targets always are)
DEFAULT_MAX_SPECIES = 40
#: nodes expanded per round of the best-first search (one batch of species per round)
DEFAULT_BEAM = 4

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


def _freeze_hydrogens(mol: Chem.RWMol) -> None:
    for atom in mol.GetAtoms():
        n_h = atom.GetTotalNumHs()
        atom.SetNoImplicit(True)
        atom.SetNumExplicitHs(n_h)


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


def _shift_product(mol: Chem.Mol, centre: int, beta: int, group: int | None) -> str:
    """Canonical SMILES of the cation after ``group`` (None: a hydrogen) moves from beta to centre.

    Stereo: a migrating stereocentre keeps its configuration (its bond to the
    β-carbon becomes a bond to the centre in the same place), so its chiral
    tag is flipped when the edit permutes its neighbour list oddly; double
    bonds keep their cis/trans relation (the β-carbon, where it was a stereo
    reference, is replaced by the centre); the new cation centre and the old
    centre lose any tag.
    """
    rw = Chem.RWMol(mol)
    _freeze_hydrogens(rw)
    # every double-bond configuration as cis/trans to its stereo atoms (E = trans, Z = cis:
    # RDKit takes the CIP-highest neighbours as stereo atoms when it perceives E/Z)
    relative = {Chem.BondStereo.STEREOE: Chem.BondStereo.STEREOTRANS,
                Chem.BondStereo.STEREOZ: Chem.BondStereo.STEREOCIS,
                Chem.BondStereo.STEREOCIS: Chem.BondStereo.STEREOCIS,
                Chem.BondStereo.STEREOTRANS: Chem.BondStereo.STEREOTRANS}
    stereo_bonds = []
    for bond in rw.GetBonds():
        if bond.GetStereo() in relative and len(bond.GetStereoAtoms()) == 2:
            ends = list(bond.GetStereoAtoms())
            if group is not None and group in (bond.GetBeginAtomIdx(), bond.GetEndAtomIdx()):
                ends = [centre if a == beta else a for a in ends]
            stereo_bonds.append(((bond.GetBeginAtomIdx(), bond.GetEndAtomIdx()), ends, relative[bond.GetStereo()]))
    c_atom, b_atom = rw.GetAtomWithIdx(centre), rw.GetAtomWithIdx(beta)
    if group is None:
        b_atom.SetNumExplicitHs(b_atom.GetNumExplicitHs() - 1)
        c_atom.SetNumExplicitHs(c_atom.GetNumExplicitHs() + 1)
    else:
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
    c_atom.SetFormalCharge(0)
    b_atom.SetFormalCharge(1)
    b_atom.SetChiralTag(Chem.ChiralType.CHI_UNSPECIFIED)
    c_atom.SetChiralTag(Chem.ChiralType.CHI_UNSPECIFIED)
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
    product = rw.GetMol()
    Chem.SanitizeMol(product)
    Chem.SetDoubleBondNeighborDirections(product)
    Chem.AssignStereochemistry(product, cleanIt=True, force=True)
    return carbocation(Chem.MolToSmiles(product), force=True).smiles


def _enumerate(cation_smiles: str) -> tuple[Carbocation, list[ShiftCandidate], list[str]]:
    cation = cation_smiles if isinstance(cation_smiles, Carbocation) else carbocation(cation_smiles, force=True)
    mol = Chem.MolFromSmiles(cation.smiles)
    with_h = Chem.AddHs(mol)
    centre = mol.GetAtomWithIdx(cation.centre)
    c_label = f"C{cation.centre}"
    out: dict[str, ShiftCandidate] = {}
    skipped: list[str] = []
    if _unsaturated(centre):
        skipped.append(f"{c_label}: the cationic carbon is part of a π system (vinyl, allyl or aromatic "
                       "cation as written); shifts onto it across the π bond are not enumerated")
    for bond in centre.GetBonds():
        beta = bond.GetOtherAtom(centre)
        b_label = f"{beta.GetSymbol()}{beta.GetIdx()}"
        if beta.GetSymbol() != "C":
            skipped.append(f"{b_label}: a shift from a β-{beta.GetSymbol()} would put the charge on "
                           f"{beta.GetSymbol()} (hetero-β shifts are out of scope)")
            continue
        if bond.GetBondType() != Chem.BondType.SINGLE or _unsaturated(beta):
            skipped.append(f"{b_label}: sp2/sp β-carbon; a shift from it would leave a vinyl or aryl cation")
            continue
        if beta.GetFormalCharge() != 0:
            skipped.append(f"{b_label}: charged β-carbon")
            continue
        moves: list[tuple[int | None, str, str]] = []
        if beta.GetTotalNumHs() > 0:
            moves.append((None, "hydride", "H"))
        for gbond in beta.GetBonds():
            group = gbond.GetOtherAtom(beta)
            if group.GetIdx() == centre.GetIdx():
                continue
            g_label = f"{group.GetSymbol()}{group.GetIdx()}"
            if group.GetSymbol() != "C":
                skipped.append(f"{b_label}→{c_label}: migration of {g_label} (a heteroatom group) is out of scope")
                continue
            if mol.GetBondBetweenAtoms(group.GetIdx(), centre.GetIdx()) is not None:
                skipped.append(f"{b_label}→{c_label}: {g_label} is already bonded to the cationic carbon "
                               "(three-membered ring)")
                continue
            if gbond.IsInRing():
                kind, label = "ring", f"ring bond C{beta.GetIdx()}-C{group.GetIdx()}"
            else:
                kind = "aryl" if _unsaturated(group) else "alkyl"
                label = _group_formula(with_h, beta.GetIdx(), group.GetIdx())
            moves.append((group.GetIdx(), kind, label))
        for group, kind, label in moves:
            try:
                product = _shift_product(mol, centre.GetIdx(), beta.GetIdx(), group)
            except (InputError, ValueError, RuntimeError) as exc:
                skipped.append(f"{b_label}→{c_label}: {label} shift gives no valid cation ({exc})")
                continue
            if group is None:
                migrating = min(n.GetIdx() for n in with_h.GetAtomWithIdx(beta.GetIdx()).GetNeighbors()
                                if n.GetAtomicNum() == 1)
            else:
                migrating = group
            # distinct products once each; degenerate shifts once per kind (a hydride and a
            # Wagner–Meerwein shift of 2-norbornyl both return the same ion but are different events)
            key = f"{product} {kind}" if product == cation.smiles else product
            out.setdefault(key, ShiftCandidate(kind, beta.GetIdx(), centre.GetIdx(), migrating, label,
                                                   cation.smiles, product))
    return cation, list(out.values()), skipped


def enumerate_shifts(cation_smiles: str) -> list[ShiftCandidate]:
    """Every distinct 1,2-shift product of a carbenium ion (pure graph work, no computation).

    >>> [s.product_smiles for s in enumerate_shifts("C[CH+]CC") if s.kind == "alkyl"]
    ['[CH2+]C(C)C']
    """
    return _enumerate(cation_smiles)[1]


def skipped_shifts(cation_smiles: str) -> list[str]:
    """Why shifts a chemist might expect were not enumerated (one line each)."""
    return _enumerate(cation_smiles)[2]


# --------------------------------------------------------------------------- search

@dataclass
class _Node:
    smiles: str
    depth: int
    result: SpeciesResult | SpeciesFailure | None = None
    relaxed_to: str | None = None
    bridged: bool = False
    expanded: bool = False

    @property
    def ok(self) -> bool:
        return isinstance(self.result, SpeciesResult)

    @property
    def minimum(self) -> bool:
        """A computed structure that stayed what it was drawn as (or bridged)."""
        return self.ok and self.relaxed_to is None


@dataclass(frozen=True)
class _Edge:
    source: str
    target: str
    kind: str
    relaxation: bool = False


def _species(smiles: str) -> Species:
    return Species(smiles, 1, 1)


_SADDLE_TARGET = re.compile(r"saddle point.*following the mode changes the bonding \(.*became (\S+)\): ")


def _saddle_target(result: SpeciesResult) -> str | None:
    """The cation a saddle point's imaginary mode leads to, as the core's guard reported it."""
    for warning in result.warnings:
        match = _SADDLE_TARGET.search(warning)
        if match:
            try:
                return carbocation(match.group(1), force=True).smiles
            except InputError:
                return None
    return None


def _relaxed_target(result: SpeciesResult) -> tuple[str | None, bool]:
    """(canonical SMILES the structure relaxes to without a barrier, bridged?) from the core's guard.

    A structure counts as relaxing when every conformer changed its bonds on
    optimisation (``rearranged``), or when it is a saddle point whose
    imaginary mode, followed, changes the bonding to a classical cation.
    """
    if not result.rearranged:
        return _saddle_target(result), False
    if result.relaxed_smiles:
        try:
            return carbocation(result.relaxed_smiles, force=True).smiles, False
        except InputError:
            return None, False
    return None, "bridged" in result.bonding_change


class ShiftSearch:
    """Best-first cascade of 1,2-shifts from one cation; feed it results round by round.

    ``requests()`` lists the species to compute next; ``receive(results)``
    takes them (a dict Species → SpeciesResult | SpeciesFailure).  The
    search is done when ``requests()`` is empty.
    """

    def __init__(self, cation: Carbocation, *, depth: int = DEFAULT_DEPTH,
                 ceiling_kcal_mol: float = DEFAULT_CEILING_KCAL_MOL, max_species: int = DEFAULT_MAX_SPECIES,
                 beam: int = DEFAULT_BEAM):
        self.cation = cation
        self.parent = cation.smiles
        self.depth = int(depth)
        self.ceiling = float(ceiling_kcal_mol)
        self.max_species = int(max_species)
        self.beam = max(1, int(beam))
        self.nodes: dict[str, _Node] = {self.parent: _Node(self.parent, 0)}
        self.edges: list[_Edge] = []
        self.candidates: dict[str, list[ShiftCandidate]] = {}
        self.truncated = False
        self._pending: list[str] = [self.parent]
        self.stopped = False

    # ------------------------------------------------------------ protocol
    def requests(self) -> list[Species]:
        return [] if self.stopped else [_species(s) for s in self._pending]

    def receive(self, results: dict) -> None:
        for smiles in self._pending:
            node = self.nodes[smiles]
            node.result = results.get(_species(smiles), SpeciesFailure("not computed"))
            if node.ok:
                node.relaxed_to, node.bridged = _relaxed_target(node.result)
                if node.relaxed_to == smiles:  # a degenerate rearrangement: still the same ion
                    node.relaxed_to = None
        self._pending = []
        if not self.nodes[self.parent].ok:
            self.stopped = True
            return
        self._plan()

    def stop(self) -> None:
        self.stopped = True

    # ------------------------------------------------------------ internals
    def g_rel(self, smiles: str) -> float | None:
        node, parent = self.nodes.get(smiles), self.nodes[self.parent]
        if node is None or not node.ok or not parent.ok:
            return None
        return (node.result.G_hartree - parent.result.G_hartree) * units.HARTREE_TO_KCAL_MOL

    def candidates_of(self, smiles: str) -> list[ShiftCandidate]:
        if smiles not in self.candidates:
            try:
                self.candidates[smiles] = enumerate_shifts(smiles)
            except InputError:
                self.candidates[smiles] = []
        return self.candidates[smiles]

    def _add_node(self, smiles: str, depth: int, *, capped: bool) -> bool:
        if smiles in self.nodes:
            return False
        if capped and len(self.nodes) >= self.max_species:
            self.truncated = True
            return False
        self.nodes[smiles] = _Node(smiles, depth)
        self._pending.append(smiles)
        return True

    def _plan(self) -> None:
        # 1. barrierless relaxations: the structure a non-minimum became is computed itself
        for node in list(self.nodes.values()):
            if node.ok and node.relaxed_to and not node.expanded:
                node.expanded = node.smiles != self.parent
                kind = next((c.kind for c in self.candidates_of(node.smiles)
                             if c.product_smiles == node.relaxed_to), "relaxation")
                if not any(e.relaxation and e.source == node.smiles for e in self.edges):
                    self.edges.append(_Edge(node.smiles, node.relaxed_to, kind, relaxation=True))
                self._add_node(node.relaxed_to, node.depth, capped=False)
        # 2. best-first expansion of minima within the ceiling and the depth (the parent always)
        open_nodes = [n for n in self.nodes.values()
                      if n.ok and not n.expanded and n.depth < self.depth
                      and (n.smiles == self.parent or (n.minimum and self.g_rel(n.smiles) <= self.ceiling))]
        open_nodes.sort(key=lambda n: (n.smiles != self.parent, self.g_rel(n.smiles), n.smiles))
        for node in open_nodes[: self.beam]:
            node.expanded = True
            for cand in self.candidates_of(node.smiles):
                if cand.degenerate:
                    continue
                self.edges.append(_Edge(node.smiles, cand.product_smiles, cand.kind))
                self._add_node(cand.product_smiles, node.depth + 1, capped=True)
        if not self._pending and any(n.ok and not n.expanded and n.depth < self.depth and n.minimum
                                     and self.g_rel(n.smiles) <= self.ceiling for n in self.nodes.values()):
            self._plan()  # all candidates of this round were known already: expand the next ones

    # ------------------------------------------------------------ answers
    def sink(self) -> str | None:
        """The most stable minimum reachable from the parent (the parent itself if nothing is lower)."""
        reach = self._paths()
        minima = [s for s in reach if self.nodes[s].minimum]
        if not minima:
            return None
        return min(minima, key=lambda s: (self.g_rel(s), reach[s][0], len(reach[s][1]), s))

    def _paths(self) -> dict[str, tuple[float, list[_Edge]]]:
        """For every reachable computed node: (highest G on the path, edges), minimax over paths."""
        start = self.parent
        if not self.nodes[start].ok:
            return {}
        best: dict[str, tuple[float, list[_Edge]]] = {}
        counter = 0
        heap = [(self.g_rel(start), 0, counter, start, [])]
        out: dict[str, list[_Edge]] = {}
        for e in self.edges:
            out.setdefault(e.source, []).append(e)
        while heap:
            high, steps, _, smiles, path = heapq.heappop(heap)
            if smiles in best:
                continue
            best[smiles] = (high, path)
            if smiles != start and not self.nodes[smiles].ok:
                continue
            for e in out.get(smiles, []):
                target = self.nodes.get(e.target)
                if target is None or not target.ok or e.target in best:
                    continue
                counter += 1
                heapq.heappush(heap, (max(high, self.g_rel(e.target)), steps + 1, counter, e.target, path + [e]))
        return best

    def best_path(self) -> tuple[list[_Edge], float | None]:
        sink = self.sink()
        if sink is None:
            return [], None
        high, path = self._paths()[sink]
        return path, high


# --------------------------------------------------------------------------- records

def _rel(a: SpeciesResult, b: SpeciesResult) -> dict[str, float]:
    k = units.HARTREE_TO_KCAL_MOL
    return {"dE_kcal_mol": (b.E_hartree - a.E_hartree) * k, "dH_kcal_mol": (b.H_hartree - a.H_hartree) * k,
            "dG_kcal_mol": (b.G_hartree - a.G_hartree) * k}


def classify_relaxation(cation_smiles: str, result: SpeciesResult,
                        candidates: list[ShiftCandidate] | None = None) -> str | None:
    """Say in shift terms what the core's bonding guard saw happen to a cation on optimisation.

    None when nothing happened.  A classical product that is one of the
    cation's 1,2-shift products is named as that shift, without a barrier at
    this level; a bridged structure names the atom bonded to both centres and
    both classical parents.
    """
    from cationcalc.chem.bonding import bonds_from_mol, compare_bonding

    cation = carbocation(cation_smiles, force=True)
    candidates = enumerate_shifts(cation.smiles) if candidates is None else candidates
    level = result.level
    if not result.rearranged:
        saddle = _saddle_target(result)
        if saddle is not None:
            match = [c for c in candidates if c.product_smiles == saddle]
            what = (f"the 1,2-{match[0].kind} shift product {saddle} ({match[0].group} from C{match[0].from_atom} "
                    f"to C{match[0].to_atom})" if match else saddle)
            return (f"not a minimum: a saddle point at {level} whose imaginary mode leads to {what} without a "
                    "barrier; the values are those of the saddle point")
        partial = [c for c in candidates if any(f"became {c.product_smiles})" in w for w in result.warnings)]
        if partial:
            return "; ".join(f"some conformers underwent the 1,2-{c.kind} shift to {c.product_smiles} without a "
                             f"barrier on optimisation at {level} (set aside; the others are minima)" for c in partial)
        return None
    mol = Chem.AddHs(Chem.MolFromSmiles(cation.smiles))
    change = compare_bonding(bonds_from_mol(mol), result.numbers, result.positions_angstrom, cation.charge)
    if change.bridged_atoms:
        parts = []
        for atom in change.bridged_atoms:
            now = {b if a == atom else a for a, b in change.formed if atom in (a, b)}
            # the old partner is the neighbour it had in the cation that is bonded to the new one
            before = {n.GetIdx() for n in mol.GetAtomWithIdx(atom).GetNeighbors()
                      if any(mol.GetBondBetweenAtoms(n.GetIdx(), p) is not None for p in now)}
            symbol = mol.GetAtomWithIdx(atom).GetSymbol()
            heavy_atom = atom if symbol != "H" else None
            partners = sorted(before) + sorted(now)
            parents = [cation.smiles]
            for c in candidates:
                if c.to_atom in now and c.from_atom in before and (
                        (heavy_atom is None and c.kind == "hydride") or c.migrating_atom == heavy_atom):
                    parents.append(c.product_smiles)
            parts.append(f"bridged: {symbol}{atom} bonded to both "
                         + " and ".join(f"{mol.GetAtomWithIdx(p).GetSymbol()}{p}" for p in partners)
                         + f" (nonclassical) at {level}; classical parents: " + " and ".join(parents))
        return "; ".join(parts)
    if change.relaxed_smiles:
        target = carbocation(change.relaxed_smiles, force=True).smiles
        match = [c for c in candidates if c.product_smiles == target]
        if match:
            c = match[0]
            return (f"not a minimum: the optimised cation is the 1,2-{c.kind} shift product {target} "
                    f"({c.group} from C{c.from_atom} to C{c.to_atom}); this shift has no barrier at {level}")
        return f"not a minimum: relaxed to {target} ({result.bonding_change}), not a single 1,2-shift"
    return f"not a minimum: {result.bonding_change}"


def barrier_status(entry: dict) -> str:
    """What is known about the barrier of one shift, in words.

    >>> barrier_status({"barrier_kcal_mol": None, "product_is_minimum": False, "degenerate": False})
    'barrier unknown: the product is not a minimum (--barriers computes it)'
    """
    if entry.get("barrier") and entry["barrier"].get("barrierless"):
        return "no barrier (NEB)"
    if entry.get("barrier_kcal_mol") is not None:
        return f"ΔE‡ {entry['barrier_kcal_mol']:.1f} kcal/mol (NEB)"
    if entry.get("product_is_minimum") is False:
        return "barrier unknown: the product is not a minimum (--barriers computes it)"
    return "barrier not computed (--barriers)"


def _path_text(path: list[dict]) -> str:
    if not path:
        return ""
    parts = [path[0]["from_smiles"]]
    for step in path:
        if step["barrierless"]:
            parts.append(f"⇒ ({step['kind']}, no barrier) {step['to_smiles']}")
        else:
            parts.append(f"→ ({step['kind']}, ΔG {step['dG_kcal_mol']:+.1f}) {step['to_smiles']}")
    return " ".join(parts)


def _build_record(search: ShiftSearch, base: dict, threshold: float) -> dict:
    record = dict(base)
    parent = search.nodes[search.parent]
    record["cation_smiles"] = search.parent
    if not parent.ok:
        message = parent.result.message if parent.result is not None else "not computed"
        record.update({"error": f"{search.parent}: {message}", "warnings": [], "rearranged": False})
        return record
    pres: SpeciesResult = parent.result
    candidates = search.candidates_of(search.parent)
    used: dict[str, SpeciesResult] = {"parent": pres}
    shifts = []
    for cand in candidates:
        entry = {"kind": cand.kind, "group": cand.group, "from_atom": cand.from_atom, "to_atom": cand.to_atom,
                 "migrating_atom": cand.migrating_atom, "product_smiles": cand.product_smiles,
                 "degenerate": cand.degenerate, "dE_kcal_mol": None, "dH_kcal_mol": None, "dG_kcal_mol": None,
                 "flagged": False, "product_is_minimum": None, "relaxed_to": None,
                 "barrier_kcal_mol": None}
        if cand.degenerate:
            entry.update({"dE_kcal_mol": 0.0, "dH_kcal_mol": 0.0, "dG_kcal_mol": 0.0, "product_is_minimum": True})
        else:
            node = search.nodes.get(cand.product_smiles)
            if node is None or node.result is None:
                entry["error"] = "not computed (species cap reached)"
            elif not node.ok:
                entry["error"] = node.result.message
            else:
                used[cand.product_smiles] = node.result
                entry.update({k: round(v, 2) for k, v in _rel(pres, node.result).items()})
                entry["product_is_minimum"] = node.relaxed_to is None
                if node.relaxed_to:
                    entry["relaxed_to"] = node.relaxed_to
                elif node.bridged:
                    entry["relaxed_to"] = "bridged"
                reverts = node.relaxed_to == search.parent
                entry["flagged"] = bool(entry["dG_kcal_mol"] < -threshold and not reverts)
        shifts.append(entry)
    shifts.sort(key=lambda e: (e["dG_kcal_mol"] is None, e["dG_kcal_mol"] if e["dG_kcal_mol"] is not None else 0))
    path_edges, high = search.best_path()
    path = []
    for e in path_edges:
        a, b = search.nodes[e.source].result, search.nodes[e.target].result
        used.setdefault(e.target, b)
        step = {"from_smiles": e.source, "to_smiles": e.target, "kind": e.kind,
                "dG_kcal_mol": round(_rel(a, b)["dG_kcal_mol"], 2), "barrierless": e.relaxation,
                "to_is_minimum": search.nodes[e.target].minimum}
        path.append(step)
    # a step that lands on a structure that is not a minimum has no known top: the G stored for that
    # structure is the one it relaxed to, so the path's highest point is then unknown, not 0
    through = [step["to_smiles"] for step in path if not step["barrierless"] and not step["to_is_minimum"]]
    for entry in shifts:
        entry["barrier_status"] = barrier_status(entry)
    sink = search.sink()
    sink_rel = _rel(pres, search.nodes[sink].result) if sink else None
    relaxation = classify_relaxation(search.parent, pres, candidates)
    flagged = [s for s in shifts if s["flagged"]]
    warnings: list[str] = []
    for res in [pres] + ([search.nodes[sink].result] if sink else []):
        for w in res.warnings:
            if w not in warnings:
                warnings.append(w)
    if pres.rearranged:
        warnings.insert(0, f"{search.parent} is not a minimum at {pres.level}: its ΔG values are relative to "
                           "the structure it relaxed to")
    if search.truncated:
        warnings.append(f"search stopped at {search.max_species} species: a lower sink may exist beyond it "
                        "(raise max_species)")
    failed = [n for n in search.nodes.values() if n.result is not None and not n.ok]
    for n in failed:
        warnings.append(f"{n.smiles}: {n.result.message}")
    if search.stopped and any(n.result is None for n in search.nodes.values()):
        warnings.append("search interrupted before it finished")
    record.update({
        "parent_relaxation": relaxation,
        "rearranged": pres.rearranged,
        "relaxed_cation_smiles": pres.relaxed_smiles,
        "threshold_kcal_mol": threshold,
        "shifts": shifts,
        "flagged_summary": "; ".join(f"{s['kind']} ({s['group']}) → {s['product_smiles']} ΔG {s['dG_kcal_mol']:+.1f}"
                             + (f" (relaxes to {s['relaxed_to']})" if s["relaxed_to"] else "")
                             for s in flagged) or "none",
        "sink_smiles": sink,
        **({f"sink_{k}": round(v, 2) for k, v in sink_rel.items()} if sink_rel else {}),
        "path": path,
        "path_text": _path_text(path),
        "path_highest_kcal_mol": None if high is None or through else round(max(high, 0.0), 2),
        "path_barrier_note": (f"barrier unknown: the path passes {', '.join(through)}, which is not a minimum at "
                              f"{pres.level} (its G is that of the structure it relaxes to); --barriers computes "
                              "an NEB barrier" if through else ""),
        "degenerate_shifts": [f"{s['kind']} ({s['group']}) C{s['from_atom']}→C{s['to_atom']}" for s in shifts
                              if s["degenerate"]],
        "search": {"depth": search.depth, "ceiling_kcal_mol": search.ceiling, "max_species": search.max_species,
                   "species_computed": sum(1 for n in search.nodes.values() if n.result is not None),
                   "truncated": search.truncated},
        "skipped": skipped_shifts(search.parent),
        "warnings": warnings,
        "profile": species_profile({k: v for k, v in {n.smiles: n.result for n in search.nodes.values()}.items()
                             if isinstance(v, SpeciesResult)}),
    })
    return record


def _default_compute(settings: Settings, workers: int, progress, store) -> Callable[[list[Species]], dict]:
    def compute(species_list: list[Species]) -> dict:
        kwargs = {"store": store} if store is not None else {}
        return compute_many(species_list, settings, workers=workers, progress=progress, **kwargs)

    return compute


def _drive(searches: list[ShiftSearch], compute: Callable[[list[Species]], dict], cache: dict) -> bool:
    """Run searches in lock-step: one batch of species per round over all inputs. True if interrupted."""
    while True:
        wanted = [sp for s in searches for sp in s.requests()]
        if not wanted:
            return False
        missing = list(dict.fromkeys(sp for sp in wanted if sp not in cache))
        interrupted = False
        if missing:
            try:
                cache.update(compute(missing))
            except Interrupted as exc:
                cache.update({k: v for k, v in exc.results.items() if isinstance(v, SpeciesResult)})
                interrupted = True
        for s in searches:
            if s.requests():
                s.receive(cache)
        if interrupted:
            for s in searches:
                s.stop()
            return True


def run_shifts(items: Iterable[tuple[str, str]], settings: Settings, *, depth: int = DEFAULT_DEPTH,
               threshold_kcal_mol: float = DEFAULT_THRESHOLD_KCAL_MOL,
               ceiling_kcal_mol: float = DEFAULT_CEILING_KCAL_MOL, barriers: bool = False, workers: int = 1,
               force: bool = False, progress=None, store=None, max_species: int = DEFAULT_MAX_SPECIES,
               compute: Callable[[list[Species]], dict] | None = None,
               barrier_options: dict | None = None) -> list[dict]:
    """1,2-shift analysis of each (cation SMILES, name); one record per input, order kept.

    ``compute`` (species list → dict of results) defaults to
    :func:`~cationcalc.execution.executors.compute_many` with ``workers``, ``progress``
    and ``store``; searches of all inputs advance together so that each
    round is one parallel batch.  With ``barriers`` every flagged and every
    degenerate shift of a parent that is a minimum gets an NEB barrier
    (``barrier_options`` go to :func:`cationcalc.compute.barriers.shift_barrier`).
    """
    compute = compute or _default_compute(settings, workers, progress, store)
    prepared: list[tuple[dict, ShiftSearch | None, str | None]] = []
    for text, name in items:
        base = record_base(text, name, settings)
        try:
            cation = carbocation(text, force=force)
        except InputError as exc:
            prepared.append((base, None, str(exc)))
            continue
        prepared.append((base, ShiftSearch(cation, depth=depth, ceiling_kcal_mol=ceiling_kcal_mol,
                                           max_species=max_species), None))
    searches = [s for _, s, _ in prepared if s is not None]
    cache: dict = {}
    interrupted = _drive(searches, compute, cache)
    records = []
    for base, search, error in prepared:
        if search is None:
            records.append({**base, "error": error, "warnings": [], "rearranged": False})
            continue
        record = _build_record(search, base, threshold_kcal_mol)
        if barriers and not interrupted and "error" not in record:
            _add_barriers(record, search, settings, barrier_options or {})
        records.append(record)
    records = typed_records("shifts", records)  # typed records from here on
    if interrupted:
        raise BatchInterrupted(records)
    return records


def _add_barriers(record: dict, search: ShiftSearch, settings: Settings, options: dict) -> None:
    from cationcalc.compute.barriers import shift_barrier

    parent: SpeciesResult = search.nodes[search.parent].result
    if parent.rearranged:
        record["warnings"].append("no NEB barriers: the parent is not a minimum at this level")
        return
    by_product = {c.product_smiles: c for c in search.candidates_of(search.parent)}
    total = 0.0
    for entry in record["shifts"]:
        if not (entry["flagged"] or entry["degenerate"]):
            continue
        cand = by_product[entry["product_smiles"]]
        accept = {entry["relaxed_to"]} if entry.get("relaxed_to") and entry["relaxed_to"] != "bridged" else set()
        result = shift_barrier(parent, cand, settings, accept_smiles=accept, **options)
        entry["barrier_kcal_mol"] = None if result.barrier_kcal_mol is None else round(result.barrier_kcal_mol, 2)
        entry["barrier"] = result.as_dict()
        entry["barrier_status"] = barrier_status(entry)
        total += result.runtime_s
    record.setdefault("profile", {})["barriers_s"] = round(total, 2)


__all__ = ["ShiftCandidate", "ShiftSearch", "enumerate_shifts", "skipped_shifts", "classify_relaxation",
           "run_shifts", "DEFAULT_THRESHOLD_KCAL_MOL", "DEFAULT_CEILING_KCAL_MOL",
           "DEFAULT_DEPTH", "DEFAULT_MAX_SPECIES", "KINDS"]
