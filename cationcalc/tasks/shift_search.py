"""The cascade of 1,2-shifts from one carbocation: a best-first search fed with computed species round by round.

:class:`ShiftSearch` is best-first over shift products (bounded depth,
bounded number of species, no revisits), every product computed exactly
like the parent (same conformer search, optimisation and thermochemistry).
A product is expanded only while its G is at most ``ceiling`` above the
parent's, so paths may climb through uphill intermediates.  A product that
is not a minimum (the core's bonding guard sees every conformer change its
bonds) is a barrierless onward step to the structure it relaxed to; the
energies it carries are those of that relaxed structure.  The sink is the
most stable minimum reached; the path to it is the one whose highest point
is lowest, and that highest point (relative to the parent) is a lower bound
to the barrier of the cascade.

The search computes nothing itself: ``requests()`` lists the species it
needs, ``receive(results)`` takes them (:func:`cationcalc.tasks.shifts.run_shifts`
drives many searches in lock-step).

Example
-------
>>> from cationcalc.chem.species import carbocation
>>> search = ShiftSearch(carbocation("C[CH+]C"))
>>> [sp.smiles for sp in search.requests()]
['C[CH+]C']
"""

from __future__ import annotations

import heapq
import re
from dataclasses import dataclass

from cationcalc.chem import units
from cationcalc.chem.shift_graph import ShiftCandidate, enumerate_shifts
from cationcalc.chem.species import Carbocation, InputError, Species, carbocation
from cationcalc.compute.models import SpeciesResult
from cationcalc.execution.executors import SpeciesFailure

#: a cascade may pass through intermediates up to this much above the parent (kcal/mol);
#: 25 kcal/mol keeps secondary→primary steps (about 15–20 kcal/mol uphill) in reach
DEFAULT_CEILING_KCAL_MOL = 25.0
#: longest shift sequence searched (barrierless relaxations do not count)
DEFAULT_DEPTH = 3
#: at most this many distinct cations computed per input (relaxation targets always are)
DEFAULT_MAX_SPECIES = 40
#: nodes expanded per round of the best-first search (one batch of species per round)
DEFAULT_BEAM = 4


@dataclass
class SearchNode:
    """One cation of the search: its result and whether it relaxed (to what) or was expanded."""

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
class SearchEdge:
    """A 1,2-shift (or a barrierless relaxation) from one cation of the search to another."""

    source: str
    target: str
    kind: str
    relaxation: bool = False


def _species(smiles: str) -> Species:
    return Species(smiles, 1, 1)


_SADDLE_TARGET = re.compile(r"saddle point.*following the mode changes the bonding \(.*became (\S+)\): ")


def saddle_target(result: SpeciesResult) -> str | None:
    """The cation a saddle point's imaginary mode leads to, as the core's guard reported it."""
    for warning in result.warnings:
        match = _SADDLE_TARGET.search(warning)
        if match:
            try:
                return carbocation(match.group(1), force=True).smiles
            except InputError:
                return None
    return None


def relaxed_target(result: SpeciesResult) -> tuple[str | None, bool]:
    """(canonical SMILES the structure relaxes to without a barrier, bridged?) from the core's guard.

    A structure counts as relaxing when every conformer changed its bonds on
    optimisation (``rearranged``), or when it is a saddle point whose
    imaginary mode, followed, changes the bonding to a classical cation.
    """
    if not result.rearranged:
        return saddle_target(result), False
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
        self.nodes: dict[str, SearchNode] = {self.parent: SearchNode(self.parent, 0)}
        self.edges: list[SearchEdge] = []
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
                node.relaxed_to, node.bridged = relaxed_target(node.result)
                if node.relaxed_to == smiles:  # a degenerate rearrangement: still the same ion
                    node.relaxed_to = None
        self._pending = []
        if not self.nodes[self.parent].ok:
            self.stopped = True
            return
        self._plan()

    def refresh(self, results: dict) -> None:
        """Take new results of species already received (a species recomputed from a lower structure)."""
        for node in self.nodes.values():
            new = results.get(_species(node.smiles))
            if node.ok and isinstance(new, SpeciesResult) and new is not node.result:
                node.result = new
                node.relaxed_to, node.bridged = relaxed_target(new)
                if node.relaxed_to == node.smiles:
                    node.relaxed_to = None

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
        self.nodes[smiles] = SearchNode(smiles, depth)
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
                    self.edges.append(SearchEdge(node.smiles, node.relaxed_to, kind, relaxation=True))
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
                self.edges.append(SearchEdge(node.smiles, cand.product_smiles, cand.kind))
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

    def _paths(self) -> dict[str, tuple[float, list[SearchEdge]]]:
        """For every reachable computed node: (highest G on the path, edges), minimax over paths."""
        start = self.parent
        if not self.nodes[start].ok:
            return {}
        best: dict[str, tuple[float, list[SearchEdge]]] = {}
        counter = 0
        heap = [(self.g_rel(start), 0, counter, start, [])]
        out: dict[str, list[SearchEdge]] = {}
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

    def best_path(self) -> tuple[list[SearchEdge], float | None]:
        sink = self.sink()
        if sink is None:
            return [], None
        high, path = self._paths()[sink]
        return path, high


__all__ = ["ShiftSearch", "SearchNode", "SearchEdge", "saddle_target", "relaxed_target", "DEFAULT_CEILING_KCAL_MOL",
           "DEFAULT_DEPTH", "DEFAULT_MAX_SPECIES", "DEFAULT_BEAM"]
