"""Ionization sites of a substrate, the cation each forms, and a verdict in words.

Pure chemistry on molecular graphs; nothing here computes energies.

* :func:`heterolysis_sites` lists every symmetry-distinct C–X bond the
  leaving-group library recognises (optionally after protonating alcohol and
  ether oxygens, and the carbonyl oxygen of esters and carbamates so that the
  neutral carboxylic or carbamic acid leaves, ``acid=True``), each with the substrate, the carbocation and
  the departing species, atom indices in the input as given.
* :func:`hydride_sites` lists the cation of every symmetry-distinct C–H
  (hydride abstraction from a hydrocarbon or any neutral).
* :func:`cation_class` names the cationic carbon in the chemist's words
  (tertiary, benzylic, allylic, heteroatom-stabilized, vinylic, aryl, …).
* :func:`verdict` turns the class and the computed numbers into a plausibility
  verdict, with thresholds read from ``data/ionization_verdicts.csv``.
* :func:`reference_substrate` puts the same departing group on another
  skeleton (by default tert-butyl), for ΔΔG_ion.

Example
-------
>>> from cationcalc.chem.ionization import heterolysis_sites, hydride_sites
>>> [(s.site_atom, s.leaving_group, s.cation.smiles) for s in heterolysis_sites("CC(C)(C)O", acid=True)]
[(1, 'water', 'C[C+](C)C')]
>>> [(s.site_atom, s.cation_class) for s in hydride_sites("CC(C)CC")]
[(0, 'primary'), (1, 'tertiary'), (3, 'secondary'), (4, 'primary')]
>>> [s.cation_class for s in hydride_sites("Cc1ccccc1")]
['benzylic (primary)', 'aryl', 'aryl', 'aryl']
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from functools import lru_cache

from rdkit import Chem

from cationcalc.chem import units
from cationcalc.chem.leaving_groups import LeavingGroup, attachment_point, describe_library, find_leaving_groups
from cationcalc.chem.reference import load_table
from cationcalc.chem.species import Carbocation, InputError, Species, freeze_hydrogens, carbocation, parse, species, split_bond

#: the skeleton of the default reference substrate (the attachment point is *)
TERT_BUTYL = "CC(C)(C)*"

#: oxygen atoms that acid protonates: alcohol and ether O bonded only to C/H, not an ester or acid O
_BASIC_OXYGEN = Chem.MolFromSmarts("[OX2;+0;!$(O[#6]=[O,S,N]);!$(O[!#6;!#1])]")


@dataclass(frozen=True)
class IonizationSite:
    """One way a substrate can form a carbocation."""

    substrate: Species  #: what ionizes (the protonated form under acid)
    cation: Carbocation
    departing: Species  #: the leaving group as it leaves ([H-] for hydride abstraction)
    site_atom: int  #: index of the carbon that becomes cationic, in the input SMILES
    leaving_atom: int | None  #: index of the departing atom in the input (None for hydride)
    leaving_group: str  #: library name, or 'hydride'
    cation_class: str
    equivalent_atoms: tuple[int, ...] = ()  #: symmetry-equivalent carbons computed once
    protonated_oxygen: int | None = None
    departing_atom: int | None = None  #: index of the atom that bonded to carbon, in ``departing.smiles``
    group: LeavingGroup | None = field(default=None, compare=False)


#: the carbonyl oxygen of an ester or a carbamate (O=C–O–C): acid protonates it, and the alkyl group then
#: leaves as a cation with the neutral carboxylic or carbamic acid (tert-butyl esters, Boc groups)
_ESTER_CARBONYL_OXYGEN = Chem.MolFromSmarts("[OX1;+0]=[CX3;$(C-[#6,#7,#1]),$([CH1])]-[OX2;+0]-[#6]")

#: library names of the groups that leave from a carbonyl-protonated ester or carbamate
CARBONYL_ACID_GROUPS = ("carboxylic acid", "carbamic acid")


def protonation_sites(mol: Chem.Mol) -> list[int]:
    """Indices of alcohol and ether oxygens (what ``--acid`` protonates to make water or an alcohol leave)."""
    return sorted({m[0] for m in mol.GetSubstructMatches(_BASIC_OXYGEN)})


def carbonyl_protonation_sites(mol: Chem.Mol) -> list[int]:
    """Indices of ester and carbamate carbonyl oxygens (``--acid`` protonates them too).

    >>> carbonyl_protonation_sites(Chem.MolFromSmiles("CC(=O)OC(C)(C)C"))
    [2]
    >>> carbonyl_protonation_sites(Chem.MolFromSmiles("CNC(=O)OC(C)(C)C"))
    [3]
    """
    return sorted({m[0] for m in mol.GetSubstructMatches(_ESTER_CARBONYL_OXYGEN)})


def protonate(mol: Chem.Mol, oxygen: int) -> Chem.Mol:
    """R–OH → R–OH₂⁺, R–O–R' → R–O(H)⁺–R' at one oxygen; atom indices unchanged."""
    rw = Chem.RWMol(mol)
    freeze_hydrogens(rw)
    atom = rw.GetAtomWithIdx(oxygen)
    atom.SetFormalCharge(1)
    atom.SetNumExplicitHs(atom.GetNumExplicitHs() + 1)
    out = rw.GetMol()
    Chem.SanitizeMol(out)
    return out


def _symmetry_ranks(mol: Chem.Mol) -> list[int]:
    return list(Chem.CanonicalRankAtoms(mol, breakTies=False))


def heterolysis_sites(text: str, *, leaving_group: LeavingGroup | None = None, acid: bool = False,
                      force: bool = False) -> list[IonizationSite]:
    """Every symmetry-distinct C–X bond that can ionize; InputError when there is none."""
    text = (text or "").strip()
    mol = parse(text, force=force)
    for atom in mol.GetAtoms():
        atom.SetAtomMapNum(0)
    # (substrate, protonated oxygen, True when that oxygen is a carbonyl oxygen)
    candidates: list[tuple[Chem.Mol, int | None, bool]] = [(mol, None, False)]
    if acid:  # a substrate without alcohol, ether, ester or carbamate oxygens is left as it is
        candidates += [(protonate(mol, o), o, False) for o in protonation_sites(mol)]
        candidates += [(protonate(mol, o), o, True) for o in carbonyl_protonation_sites(mol)]
    sites: list[IonizationSite] = []
    skipped: list[str] = []
    seen: dict[tuple, int] = {}
    for substrate_mol, oxygen, carbonyl in candidates:
        ranks = _symmetry_ranks(substrate_mol)
        for found in find_leaving_groups(substrate_mol, only=leaving_group):
            if carbonyl:
                if found.group.name not in CARBONYL_ACID_GROUPS:
                    continue  # the carbonyl-protonated ester loses the neutral acid, nothing else
            elif oxygen is not None and found.leaving_atom != oxygen:
                continue  # the protonated substrate ionizes at the protonated oxygen
            if oxygen is None and acid and found.leaving_atom in protonation_sites(mol):
                continue  # under acid this oxygen leaves protonated (as water or an alcohol)
            key = (oxygen is not None, carbonyl, ranks[found.carbon], ranks[found.leaving_atom])
            if key in seen:
                first = sites[seen[key]]
                sites[seen[key]] = _with_equivalent(first, found.carbon)
                continue
            cation_mol, departing_mol, departing_atom = _split_tracked(substrate_mol, found.carbon, found.leaving_atom)
            try:
                cation = carbocation(Chem.MolToSmiles(cation_mol), force=True)
            except InputError:
                skipped.append(f"{found.group.name} at atom {found.carbon}")
                continue  # e.g. a cationic substrate losing an anion would leave a dication
            seen[key] = len(sites)
            sites.append(IonizationSite(
                substrate=species(Chem.MolToSmiles(substrate_mol), force=True), cation=cation,
                departing=species(Chem.MolToSmiles(departing_mol)), site_atom=found.carbon,
                departing_atom=departing_atom,
                leaving_atom=found.leaving_atom, leaving_group=found.group.name,
                cation_class=cation_class(cation), equivalent_atoms=(found.carbon,), protonated_oxygen=oxygen,
                group=found.group))
    if not sites:
        what = f"no {leaving_group.name} group" if leaving_group else "no leaving group the library recognises"
        extra = f" (skipped: {', '.join(skipped)})" if skipped else ""
        hint = "; for an alcohol or ether add --acid" if not acid and protonation_sites(mol) else ""
        raise InputError(f"{text!r} has {what}{extra}{hint}; the library knows: {describe_library()}")
    return sites


def _split_tracked(mol: Chem.Mol, carbon: int, leaving_atom: int) -> tuple[Chem.Mol, Chem.Mol, int]:
    """split_bond, plus the leaving atom's index in the departing group's canonical SMILES."""
    tagged = Chem.Mol(mol)
    tagged.GetAtomWithIdx(leaving_atom).SetAtomMapNum(1)
    cation, departing = split_bond(tagged, carbon, leaving_atom)
    index = next(a.GetIdx() for a in departing.GetAtoms() if a.GetAtomMapNum() == 1)
    departing = _neutral_acid(departing, index)
    departing.GetAtomWithIdx(index).SetAtomMapNum(0)
    canonical = Chem.MolToSmiles(departing)
    order = list(departing.GetPropsAsDict(True, True)["_smilesAtomOutputOrder"])
    return cation, Chem.MolFromSmiles(canonical), order.index(index)


def _neutral_acid(departing: Chem.Mol, index: int) -> Chem.Mol:
    """R–C(=O⁺H)–O⁻ (what a carbonyl-protonated ester leaves as, drawn as split) → R–C(=O)–OH; atom order kept."""
    leaving = departing.GetAtomWithIdx(index)
    if leaving.GetSymbol() != "O" or leaving.GetFormalCharge() != -1 or leaving.GetDegree() != 1:
        return departing
    carbon = leaving.GetNeighbors()[0]
    partner = next((b.GetOtherAtom(carbon) for b in carbon.GetBonds()
                    if b.GetBondType() == Chem.BondType.DOUBLE and b.GetOtherAtom(carbon).GetSymbol() == "O"
                    and b.GetOtherAtom(carbon).GetFormalCharge() == 1 and b.GetOtherAtom(carbon).GetTotalNumHs() == 1),
                   None)
    if partner is None:
        return departing
    rw = Chem.RWMol(departing)
    freeze_hydrogens(rw)
    o_minus, o_plus = rw.GetAtomWithIdx(index), rw.GetAtomWithIdx(partner.GetIdx())
    o_minus.SetFormalCharge(0)
    o_minus.SetNumExplicitHs(o_minus.GetNumExplicitHs() + 1)
    o_plus.SetFormalCharge(0)
    o_plus.SetNumExplicitHs(max(0, o_plus.GetNumExplicitHs() - 1))
    out = rw.GetMol()
    Chem.SanitizeMol(out)
    return out


def _with_equivalent(site: IonizationSite, atom: int) -> IonizationSite:
    return replace(site, equivalent_atoms=tuple(sorted(set(site.equivalent_atoms) | {atom})))


def hydride_sites(text: str, *, force: bool = False) -> list[IonizationSite]:
    """The carbocation of every symmetry-distinct C–H of a neutral molecule."""
    text = (text or "").strip()
    mol = parse(text, force=force)
    if Chem.GetFormalCharge(mol) != 0:
        raise InputError(f"{text!r} is charged; hydride abstraction sites are scanned on a neutral molecule")
    ranks = _symmetry_ranks(mol)
    neutral = species(text, force=force)
    sites: list[IonizationSite] = []
    by_rank: dict[int, int] = {}
    by_cation: dict[str, int] = {}
    for atom in mol.GetAtoms():
        if atom.GetSymbol() != "C" or atom.GetTotalNumHs() == 0:
            continue
        i = atom.GetIdx()
        if ranks[i] in by_rank:
            sites[by_rank[ranks[i]]] = _with_equivalent(sites[by_rank[ranks[i]]], i)
            continue
        rw = Chem.RWMol(mol)
        freeze_hydrogens(rw)
        centre = rw.GetAtomWithIdx(i)
        centre.SetNumExplicitHs(centre.GetNumExplicitHs() - 1)
        centre.SetFormalCharge(1)
        try:
            Chem.SanitizeMol(rw)
            cation = carbocation(Chem.MolToSmiles(rw), force=True)
        except (InputError, ValueError, RuntimeError):
            continue
        if cation.smiles in by_cation:  # same cation from a different rank (rare)
            index = by_cation[cation.smiles]
            sites[index] = _with_equivalent(sites[index], i)
            by_rank[ranks[i]] = index
            continue
        by_rank[ranks[i]] = by_cation[cation.smiles] = len(sites)
        sites.append(IonizationSite(substrate=neutral, cation=cation, departing=Species("[H-]", -1, 1),
                                    site_atom=i, leaving_atom=None, leaving_group="hydride",
                                    cation_class=cation_class(cation), equivalent_atoms=(i,)))
    if not sites:
        raise InputError(f"{text!r} has no C–H bond to abstract a hydride from; give a molecule with C–H bonds")
    return sites


def cation_class(cation: Carbocation) -> str:
    """The cationic carbon in the chemist's words.

    Stabilizing neighbours come first (acylium, aromatic π cation,
    heteroatom-stabilized, benzylic, allylic/propargylic, cyclopropylmethyl),
    with the substitution in brackets (from the hydrogens on the centre:
    CH₂⁺ primary, CH⁺ secondary, C⁺ tertiary); unstabilized centres are
    methyl, primary, secondary or tertiary; σ cations are vinylic or aryl.

    >>> cation_class(carbocation("C[C+](C)c1ccccc1"))
    'benzylic (tertiary)'
    """
    mol = Chem.MolFromSmiles(cation.smiles)
    c = mol.GetAtomWithIdx(cation.centre)
    connections = c.GetDegree() + c.GetTotalNumHs()
    degree = {3: "methyl", 2: "primary", 1: "secondary"}.get(c.GetTotalNumHs(), "tertiary")
    for bond in c.GetBonds():
        other = bond.GetOtherAtom(c)
        if other.GetSymbol() in ("O", "N", "S") and bond.GetBondType() == Chem.BondType.DOUBLE:
            return "acylium" if other.GetSymbol() == "O" else "heteroatom-stabilized"
    if c.GetIsAromatic():
        return "aryl" if connections == 2 else "aromatic"
    if connections == 2:
        return "aryl" if _aromatic_with_hydrogen(mol, c.GetIdx()) else "vinylic"
    if any(n.GetSymbol() in ("O", "N", "S") and n.GetFormalCharge() == 0 and n.GetTotalDegree() <= 3
           and not n.GetIsAromatic() for n in c.GetNeighbors()):
        return f"heteroatom-stabilized ({degree})"
    if any(n.GetIsAromatic() and n.GetSymbol() == "C" for n in c.GetNeighbors()):
        return f"benzylic ({degree})"
    for n in c.GetNeighbors():
        if n.GetSymbol() != "C":
            continue
        for b in n.GetBonds():
            if b.GetOtherAtom(n).GetIdx() != c.GetIdx() and b.GetBondType() in (Chem.BondType.DOUBLE,
                                                                                 Chem.BondType.TRIPLE):
                if b.GetOtherAtom(n).GetSymbol() == "C":
                    return f"allylic ({degree})" if b.GetBondType() == Chem.BondType.DOUBLE else f"propargylic ({degree})"
    ring_info = mol.GetRingInfo()
    if any(ring_info.IsAtomInRingOfSize(n.GetIdx(), 3) and not ring_info.IsAtomInRingOfSize(c.GetIdx(), 3)
           for n in c.GetNeighbors()):
        return f"cyclopropylmethyl ({degree})"
    return degree


def _aromatic_with_hydrogen(mol: Chem.Mol, centre: int) -> bool:
    """True when putting H back on the σ-cation centre gives an aromatic ring atom (phenyl-type cation)."""
    rw = Chem.RWMol(mol)
    freeze_hydrogens(rw)
    atom = rw.GetAtomWithIdx(centre)
    atom.SetFormalCharge(0)
    atom.SetNumExplicitHs(atom.GetNumExplicitHs() + 1)
    try:
        Chem.SanitizeMol(rw)
    except (ValueError, RuntimeError):
        return False
    return rw.GetAtomWithIdx(centre).GetIsAromatic()


@dataclass(frozen=True)
class Verdict:
    verdict: str
    reason: str


@lru_cache(maxsize=1)
def verdict_rules() -> tuple[dict, ...]:
    """The thresholds and structural rules, as bundled (``data/ionization_verdicts.csv``)."""
    return load_table("ionization_verdicts")


def structurally_flagged(cls: str) -> bool:
    """True for the classes the structure rule flags (methyl, unstabilized primary, vinylic, aryl)."""
    return any(r["kind"] == "class" and r["key"] == cls.split(" (")[0] for r in verdict_rules())


#: |Δ| (kcal/mol) below which two numbers are called "about the same" in verdict text (RT ln 2 at 298 K is 0.4)
ABOUT_THE_SAME_KCAL_MOL = 0.5


def comparison(quantity: str, value: float, temperature_k: float = 298.15) -> str:
    """The comparison with tert-butyl in words that follow the sign and size of the number.

    >>> comparison("ddG_ion", 8.4)
    'ionizes less easily than the tert-butyl substrate (K_ion about 1e6× smaller)'
    >>> comparison("ddG_ion", -3.0)
    'ionizes more easily than the tert-butyl substrate (K_ion about 2e2× larger)'
    >>> comparison("dHIA", 0.2)
    'about as stable as the tert-butyl cation'
    """
    if abs(value) < ABOUT_THE_SAME_KCAL_MOL:
        return ("ionizes about as easily as the tert-butyl substrate" if quantity == "ddG_ion"
                else "about as stable as the tert-butyl cation")
    if quantity != "ddG_ion":
        return (f"less stable than the tert-butyl cation by {value:.1f} kcal/mol" if value > 0
                else f"more stable than the tert-butyl cation by {-value:.1f} kcal/mol")
    factor = math.exp(abs(value) / units.rt_kcal_mol(temperature_k))
    size = f"{factor:.0e}".replace("e+0", "e").replace("e+", "e")
    return (f"ionizes less easily than the tert-butyl substrate (K_ion about {size}× smaller)" if value > 0
            else f"ionizes more easily than the tert-butyl substrate (K_ion about {size}× larger)")


def verdict(cls: str, *, ddG_ion_kcal_mol: float | None = None, dG_ion_kcal_mol: float | None = None,
            dHIA_kcal_mol: float | None = None, solution: bool = False, temperature_k: float = 298.15) -> Verdict:
    """Plausibility of unassisted ionization from the cation class and the computed numbers.

    ``ddG_ion_kcal_mol`` is relative to the tert-butyl substrate with the same
    leaving group; ``dHIA_kcal_mol`` (hydride sites) relative to the
    tert-butyl cation.  The number behind the verdict is in the reason.  In
    solution (``solution=True``) a large absolute ΔG_ion also marks a leaving
    group that is too poor to leave.

    >>> verdict("primary", ddG_ion_kcal_mol=28.8).verdict
    'SN1-implausible'
    >>> verdict("tertiary", ddG_ion_kcal_mol=0.0).verdict
    'SN1/E1 plausible'
    """
    rules = verdict_rules()
    # judged on the numbers as printed (one decimal), so a printed +10.0 never falls on the far side of 10
    if dG_ion_kcal_mol is not None:
        dG_ion_kcal_mol = round(dG_ion_kcal_mol, 1)
    if ddG_ion_kcal_mol is not None:
        quantity, value, label = "ddG_ion", round(ddG_ion_kcal_mol, 1), "ΔΔG_ion vs tert-butyl"
    elif dHIA_kcal_mol is not None:
        quantity, value, label = "dHIA", round(dHIA_kcal_mol, 1), "HIA − HIA(tert-butyl)"
    else:
        raise ValueError("verdict needs ddG_ion_kcal_mol or dHIA_kcal_mol")
    number = f"{label} = {value:+.1f} kcal/mol: {comparison(quantity, value, temperature_k)}"
    structural = next((r for r in rules if r["kind"] == "class" and r["key"] == cls.split(" (")[0]), None)
    exergonic = next(r for r in rules if r["kind"] == "threshold" and r["key"] == "exergonic")
    if structural is not None:
        if dG_ion_kcal_mol is not None and dG_ion_kcal_mol <= float(exergonic["limit_kcal_mol"]):
            return Verdict(exergonic["verdict"], f"{structural['meaning']}, but ΔG_ion = {dG_ion_kcal_mol:+.1f} "
                           f"kcal/mol: {exergonic['meaning']}")
        return Verdict(structural["verdict"], f"{structural['meaning']} ({number})")
    poor = next(r for r in rules if r["kind"] == "threshold" and r["key"] == "dG_ion_solution")
    if solution and dG_ion_kcal_mol is not None and dG_ion_kcal_mol > float(poor["limit_kcal_mol"]):
        return Verdict(poor["verdict"], f"{cls} cation, but ΔG_ion = {dG_ion_kcal_mol:+.1f} kcal/mol: "
                       f"{poor['meaning'].split(':', 1)[-1].strip()}")
    for rule in rules:
        if rule["kind"] == "threshold" and rule["key"] == quantity and value <= float(rule["limit_kcal_mol"]):
            return Verdict(rule["verdict"], f"{cls} cation: {rule['meaning'].split(':', 1)[-1].strip()} ({number})")
    raise AssertionError("the verdict table has no open-ended row")  # pragma: no cover


def reference_substrate(site: IonizationSite, skeleton: str = TERT_BUTYL) -> IonizationSite:
    """The same departing group on another skeleton (``*`` marks the carbon that ionizes).

    >>> site = heterolysis_sites("CC(Cl)c1ccccc1")[0]
    >>> reference_substrate(site).substrate.smiles
    'CC(C)(C)Cl'
    """
    if site.leaving_atom is None or site.departing_atom is None:
        raise ValueError("hydride sites have no departing group to transfer")
    if site.leaving_group in CARBONYL_ACID_GROUPS:
        return _carbonyl_acid_reference(site, skeleton)
    departing = Chem.MolFromSmiles(site.departing.smiles)
    skel, dummy, carbon = attachment_point(skeleton)
    combined = Chem.RWMol(Chem.CombineMols(skel, departing))  # the skeleton keeps its atom indices
    freeze_hydrogens(combined)
    leaving = combined.GetAtomWithIdx(skel.GetNumAtoms() + site.departing_atom)
    leaving.SetFormalCharge(leaving.GetFormalCharge() + 1)
    combined.AddBond(carbon, leaving.GetIdx(), Chem.BondType.SINGLE)
    combined.RemoveAtom(dummy)
    mol = combined.GetMol()
    Chem.SanitizeMol(mol)
    smiles = Chem.MolToSmiles(mol)
    skel_cation = skeleton_cation_smiles(skeleton)
    for x in heterolysis_sites(smiles, force=True):
        if x.leaving_group == site.leaving_group and x.departing == site.departing and x.cation.smiles == skel_cation:
            return x
    raise InputError(f"reference skeleton {skeleton!r} does not ionize to one cation with {site.leaving_group}")


def _carbonyl_acid_reference(site: IonizationSite, skeleton: str) -> IonizationSite:
    """The skeleton's ester or carbamate of the same acid, protonated on its carbonyl oxygen as ``site`` is."""
    acid_mol = Chem.RWMol(Chem.MolFromSmiles(site.departing.smiles))
    freeze_hydrogens(acid_mol)
    oxygen = acid_mol.GetAtomWithIdx(site.departing_atom)
    oxygen.SetNumExplicitHs(max(0, oxygen.GetNumExplicitHs() - 1))  # R–C(=O)OH → R–C(=O)O–*
    acid_mol.AddAtom(Chem.Atom(0))
    acid_mol.AddBond(site.departing_atom, acid_mol.GetNumAtoms() - 1, Chem.BondType.SINGLE)
    substituent = acid_mol.GetMol()
    Chem.SanitizeMol(substituent)
    mol, dummy, _ = attachment_point(skeleton)
    mol.GetAtomWithIdx(dummy).SetAtomMapNum(1)
    substituent.GetAtomWithIdx(substituent.GetNumAtoms() - 1).SetAtomMapNum(1)
    smiles = Chem.MolToSmiles(Chem.molzip(mol, substituent))
    skel_cation = skeleton_cation_smiles(skeleton)
    for x in heterolysis_sites(smiles, acid=True, force=True):
        if x.leaving_group == site.leaving_group and x.departing == site.departing and x.cation.smiles == skel_cation:
            return x
    raise InputError(f"reference skeleton {skeleton!r} does not ionize to one cation with {site.leaving_group}")


@lru_cache(maxsize=None)
def skeleton_cation_smiles(skeleton: str) -> str:
    """The cation a skeleton written with * forms at the attachment carbon.

    >>> skeleton_cation_smiles("CC(*)c1ccccc1")
    'C[CH+]c1ccccc1'
    """
    parsed, dummy, carbon = attachment_point(skeleton)
    mol = Chem.RWMol(parsed)
    freeze_hydrogens(mol)
    mol.GetAtomWithIdx(carbon).SetFormalCharge(1)
    mol.RemoveAtom(dummy)
    out = mol.GetMol()
    Chem.SanitizeMol(out)
    return carbocation(Chem.MolToSmiles(out), force=True).smiles


def equilibrium_factor(ddG_kcal_mol: float, temperature_k: float) -> float:
    """exp(−ΔΔG/RT): an equilibrium-constant ratio, not a rate ratio."""
    return math.exp(-ddG_kcal_mol / units.rt_kcal_mol(temperature_k))


__all__ = ["IonizationSite", "heterolysis_sites", "hydride_sites", "protonate", "protonation_sites", "carbonyl_protonation_sites", "CARBONYL_ACID_GROUPS",
           "cation_class", "verdict", "Verdict", "structurally_flagged", "reference_substrate", "equilibrium_factor", "comparison", "skeleton_cation_smiles", "TERT_BUTYL"]
