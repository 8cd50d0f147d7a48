"""1,2-shifts of carbocations as a task: driving forces, cascades, relaxation, one record per input.

A carbocation that rearranges before it is captured gives the wrong product.
This task answers, for one carbenium ion, which 1,2-shifts lead to a more
stable cation, by how much, and where a sequence of shifts ends:

* :func:`~cationcalc.chem.shift_graph.enumerate_shifts` (pure graph work,
  :mod:`cationcalc.chem.shift_graph`) lists the shifts and
  :func:`~cationcalc.chem.shift_graph.skipped_shifts` those left out, with why;
* :class:`~cationcalc.tasks.shift_search.ShiftSearch` is the cascade
  (:mod:`cationcalc.tasks.shift_search`);
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

from typing import Callable, Iterable

from rdkit import Chem

from cationcalc.chem import units
from cationcalc.chem.shift_graph import KINDS, ShiftCandidate, enumerate_shifts, skipped_shifts
from cationcalc.chem.species import InputError, Species, carbocation
from cationcalc.compute.models import Settings, SpeciesResult
from cationcalc.execution.executors import Interrupted, Progress, compute_many
from cationcalc.execution.lowest import settle_lowest
from cationcalc.execution.store import ResultStore
from cationcalc.tasks.funnel import ScreenedOut
from cationcalc.tasks.records import BatchInterrupted, record_base, species_profile
from cationcalc.tasks.record_types import ShiftsRecord, typed_records
from cationcalc.tasks.registry import TaskOptions, TaskSpec, option, register
from cationcalc.tasks.views import CATION, SUBSTRATE, Column
from cationcalc.tasks.shift_search import (DEFAULT_BEAM, DEFAULT_CEILING_KCAL_MOL, DEFAULT_DEPTH, DEFAULT_MAX_SPECIES,
                                           SearchEdge, ShiftSearch, saddle_target)

#: ΔG (kcal/mol) below −threshold flags a shift as a likely rearrangement (1 kcal/mol:
#: about 1.7 RT at 298 K, i.e. > 80 % product at equilibrium, and above the spread of
#: conformer-ensemble free energies between repeated runs)
DEFAULT_THRESHOLD_KCAL_MOL = 1.0


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
        return _minimum_or_saddle_text(result, candidates)
    mol = Chem.AddHs(Chem.MolFromSmiles(cation.smiles))
    change = compare_bonding(bonds_from_mol(mol), result.numbers, result.positions_angstrom, cation.charge)
    if change.bridged_atoms:
        return "; ".join(_bridged_text(mol, atom, change, cation.smiles, candidates, level)
                         for atom in change.bridged_atoms)
    if change.relaxed_smiles:
        target = carbocation(change.relaxed_smiles, force=True).smiles
        match = [c for c in candidates if c.product_smiles == target]
        if match:
            c = match[0]
            return (f"not a minimum: the optimised cation is the 1,2-{c.kind} shift product {target} "
                    f"({c.group} from C{c.from_atom} to C{c.to_atom}); this shift has no barrier at {level}")
        return f"not a minimum: relaxed to {target} ({result.bonding_change}), not a single 1,2-shift"
    return f"not a minimum: {result.bonding_change}"


def _minimum_or_saddle_text(result: SpeciesResult, candidates: list[ShiftCandidate]) -> str | None:
    """A cation that kept its bonds: a saddle point leading to a shift product, some conformers shifted, or None."""
    level = result.level
    saddle = saddle_target(result)
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


def _bridged_text(mol: Chem.Mol, atom: int, change, parent_smiles: str, candidates: list[ShiftCandidate],
                  level: str) -> str:
    """One bridging atom: the atoms it is bonded to and the classical cations it bridges."""
    now = {b if a == atom else a for a, b in change.formed if atom in (a, b)}
    # the old partner is the neighbour it had in the cation that is bonded to the new one
    before = {n.GetIdx() for n in mol.GetAtomWithIdx(atom).GetNeighbors()
              if any(mol.GetBondBetweenAtoms(n.GetIdx(), p) is not None for p in now)}
    symbol = mol.GetAtomWithIdx(atom).GetSymbol()
    heavy_atom = atom if symbol != "H" else None
    partners = sorted(before) + sorted(now)
    parents = [parent_smiles]
    for c in candidates:
        if c.to_atom in now and c.from_atom in before and (
                (heavy_atom is None and c.kind == "hydride") or c.migrating_atom == heavy_atom):
            parents.append(c.product_smiles)
    return (f"bridged: {symbol}{atom} bonded to both "
            + " and ".join(f"{mol.GetAtomWithIdx(p).GetSymbol()}{p}" for p in partners)
            + f" (nonclassical) at {level}; classical parents: " + " and ".join(parents))


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
    """The record of one input: every shift of the parent, the cascade's sink and path, warnings."""
    record = dict(base)
    parent = search.nodes[search.parent]
    record["cation_smiles"] = search.parent
    if not parent.ok:
        message = parent.result.message if parent.result is not None else "not computed"
        record.update({"error": f"{search.parent}: {message}", "warnings": [], "rearranged": False})
        return record
    pres: SpeciesResult = parent.result
    candidates = search.candidates_of(search.parent)
    shifts = [_shift_entry(search, cand, pres, threshold) for cand in candidates]
    shifts.sort(key=lambda e: (e["dG_kcal_mol"] is None, e["dG_kcal_mol"] if e["dG_kcal_mol"] is not None else 0))
    path_edges, high = search.best_path()
    path = [_path_step(search, e) for e in path_edges]
    # a step that lands on a structure that is not a minimum has no known top: the G stored for that
    # structure is the one it relaxed to, so the path's highest point is then unknown, not 0
    through = [step["to_smiles"] for step in path if not step["barrierless"] and not step["to_is_minimum"]]
    for entry in shifts:
        entry["barrier_status"] = barrier_status(entry)
    sink = search.sink()
    sink_rel = _rel(pres, search.nodes[sink].result) if sink else None
    flagged = [s for s in shifts if s["flagged"]]
    record.update({
        "parent_relaxation": classify_relaxation(search.parent, pres, candidates),
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
        "warnings": _record_warnings(search, pres, sink),
        "profile": species_profile({k: v for k, v in {n.smiles: n.result for n in search.nodes.values()}.items()
                                    if isinstance(v, SpeciesResult)}),
    })
    return record


def _shift_entry(search: ShiftSearch, cand: ShiftCandidate, pres: SpeciesResult, threshold: float) -> dict:
    """One shift of the parent: ΔE, ΔH, ΔG of the product, whether it is a minimum, flagged or not."""
    entry = {"kind": cand.kind, "group": cand.group, "from_atom": cand.from_atom, "to_atom": cand.to_atom,
             "migrating_atom": cand.migrating_atom, "product_smiles": cand.product_smiles,
             "degenerate": cand.degenerate, "dE_kcal_mol": None, "dH_kcal_mol": None, "dG_kcal_mol": None,
             "flagged": False, "product_is_minimum": None, "relaxed_to": None,
             "barrier_kcal_mol": None}
    if cand.degenerate:
        entry.update({"dE_kcal_mol": 0.0, "dH_kcal_mol": 0.0, "dG_kcal_mol": 0.0, "product_is_minimum": True})
        return entry
    node = search.nodes.get(cand.product_smiles)
    if node is None or node.result is None:
        entry["error"] = "not computed (species cap reached)"
    elif isinstance(node.result, ScreenedOut):
        entry["screened_out"] = node.result.message
    elif not node.ok:
        entry["error"] = node.result.message
    else:
        entry.update({k: round(v, 2) for k, v in _rel(pres, node.result).items()})
        entry["product_is_minimum"] = node.relaxed_to is None
        if node.relaxed_to:
            entry["relaxed_to"] = node.relaxed_to
        elif node.bridged:
            entry["relaxed_to"] = "bridged"
        reverts = node.relaxed_to == search.parent
        entry["flagged"] = bool(entry["dG_kcal_mol"] < -threshold and not reverts)
    return entry


def _path_step(search: ShiftSearch, e: SearchEdge) -> dict:
    """One step of the path to the sink, ΔG relative to the step's start."""
    a, b = search.nodes[e.source].result, search.nodes[e.target].result
    return {"from_smiles": e.source, "to_smiles": e.target, "kind": e.kind,
            "dG_kcal_mol": round(_rel(a, b)["dG_kcal_mol"], 2), "barrierless": e.relaxation,
            "to_is_minimum": search.nodes[e.target].minimum}


def _record_warnings(search: ShiftSearch, pres: SpeciesResult, sink: str | None) -> list[str]:
    """The parent's and the sink's warnings once each, then what limited the search."""
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
    failed = [n for n in search.nodes.values() if n.result is not None and not n.ok
              and not isinstance(n.result, ScreenedOut)]
    for n in failed:
        warnings.append(f"{n.smiles}: {n.result.message}")
    if search.stopped and any(n.result is None for n in search.nodes.values()):
        warnings.append("search interrupted before it finished")
    return warnings


def _default_compute(settings: Settings, workers: int, progress, store) -> Callable[[list[Species]], dict]:
    def compute(species_list: list[Species]) -> dict:
        kwargs = {"store": store} if store is not None else {}
        return compute_many(species_list, settings, workers=workers, progress=progress, **kwargs)

    return compute


#: (results of the run so far) → the species recomputed from a lower structure found among them
Settle = Callable[[dict], dict]


def _default_settle(settings: Settings, store: ResultStore | None) -> Settle:
    tried: set = set()
    return lambda cache: settle_lowest(cache, settings, store=store, tried=tried)


def _drive(searches: list[ShiftSearch], compute: Callable[[list[Species]], dict], cache: dict,
           settle: Settle = lambda cache: {}) -> bool:
    """Run searches in lock-step: one batch of species per round over all inputs. True if interrupted.

    After every round ``settle`` may recompute species (a parent a product relaxed into below its
    lowest conformer); the searches then take the new results.
    """
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
        lowered = {} if interrupted else settle(cache)
        cache.update(lowered)
        for s in searches:
            if lowered:
                s.refresh(lowered)
            if s.requests():
                s.receive(cache)
        if interrupted:
            for s in searches:
                s.stop()
            return True


def run_shifts(items: Iterable[tuple[str, str]], settings: Settings, *, depth: int = DEFAULT_DEPTH,
               threshold_kcal_mol: float = DEFAULT_THRESHOLD_KCAL_MOL,
               ceiling_kcal_mol: float = DEFAULT_CEILING_KCAL_MOL, barriers: bool = False, workers: int = 1,
               force: bool = False, progress: Progress | None = None, store: ResultStore | None = None,
               max_species: int = DEFAULT_MAX_SPECIES,
               compute: Callable[[list[Species]], dict] | None = None,
               barrier_options: dict | None = None, settle: Settle | None = None) -> list[dict]:
    """1,2-shift analysis of each (cation SMILES, name); one record per input, order kept.

    ``compute`` (species list → dict of results) defaults to
    :func:`~cationcalc.execution.executors.compute_many` with ``workers``, ``progress``
    and ``store``; searches of all inputs advance together so that each
    round is one parallel batch.  With ``barriers`` every flagged and every
    degenerate shift of a parent that is a minimum gets an NEB barrier
    (``barrier_options`` go to :func:`cationcalc.compute.barriers.shift_barrier`).
    ``settle`` (results so far → species recomputed) defaults to
    :func:`~cationcalc.execution.lowest.settle_lowest`: a product that relaxes into a cation of
    the run below that cation's lowest conformer has the cation recomputed with that structure, and
    every ΔG is taken from the lowest result.
    """
    compute = compute or _default_compute(settings, workers, progress, store)
    settle = settle or _default_settle(settings, store)
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
    interrupted = _drive(searches, compute, cache, settle)
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


class ShiftsOptions(TaskOptions):
    depth: int = option(DEFAULT_DEPTH, "longest shift path searched (default {default})", ge=1)
    threshold_kcal_mol: float = option(DEFAULT_THRESHOLD_KCAL_MOL, "ΔG (kcal/mol) below which a downhill shift is "
                                       "flagged (default {default:g})", flag="--threshold")
    ceiling_kcal_mol: float = option(DEFAULT_CEILING_KCAL_MOL, "highest intermediate (kcal/mol above the parent) "
                                     "a path may pass (default {default:g})", flag="--ceiling")
    barriers: bool = option(False, "NEB barrier for each flagged step (slow)")


SHIFTS = register(TaskSpec(
    name="shifts", record=ShiftsRecord,
    help="1,2-shifts and ring expansions of carbocations, with driving forces", options=ShiftsOptions,
    headline=None,
    view=(SUBSTRATE, CATION, Column("sink_smiles", "most stable cation reached", "smiles"),
          Column("sink_dG_kcal_mol", "ΔG to it (kcal/mol)", "value"),
          Column("path_highest_kcal_mol", "highest point (kcal/mol)", "value"),
          Column("degenerate", "degenerate shifts", get=lambda r: ", ".join(r.get("degenerate_shifts") or []))),
    wide=(("name", "name"), ("cation_smiles", "cation"), ("parent_relaxation", "as optimised"),
          ("flagged_summary", "downhill 1,2-shifts (ΔG kcal/mol)"), ("sink_smiles", "sink"),
          ("sink_dG_kcal_mol", "ΔG to sink"), ("path_text", "path"), ("path_highest_kcal_mol", "highest point")),
    title="1,2-shifts and rearrangements", report_title="does the cation rearrange?", run=run_shifts))


__all__ = ["SHIFTS", "ShiftsOptions", "ShiftCandidate", "ShiftSearch", "enumerate_shifts", "skipped_shifts",
           "classify_relaxation", "run_shifts", "barrier_status", "DEFAULT_THRESHOLD_KCAL_MOL",
           "DEFAULT_CEILING_KCAL_MOL", "DEFAULT_DEPTH", "DEFAULT_MAX_SPECIES", "DEFAULT_BEAM", "KINDS"]
