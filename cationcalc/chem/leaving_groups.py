"""The leaving-group library: which bonds of a substrate can ionize, and what leaves.

The library is one table, ``data/leaving_groups.csv`` (name, aliases,
SMARTS, ladder group, departing species, its charge, notes), so adding a
group is one line.  Each SMARTS maps the carbon that becomes cationic as
``:1`` and the atom that leaves with the bonding pair as ``:2``; ``:3`` marks
substituent atoms that belong to the rest of the molecule (the R' of a
protonated ether R–O(H)⁺–R'), every other atom belongs to the group.  Rows are
tried in order and a bond belongs to the first row that matches it, so
specific groups (triflate) come before generic ones (any sulfonate).

Both kinds of departing group are handled by one rule: the bonding pair goes
to the leaving atom, whose formal charge falls by one.  A neutral substrate
gives an anion (R–Cl → R⁺ + Cl⁻); a cationic one gives a neutral molecule
(R–OH₂⁺ → R⁺ + H₂O, R–N₂⁺ → R⁺ + N₂).

Example
-------
>>> from cationcalc.chem.leaving_groups import find_leaving_groups, leaving_group
>>> [(s.carbon, s.leaving_atom, s.group.name) for s in find_leaving_groups("CC(C)(C)OS(C)(=O)=O")]
[(1, 4, 'mesylate')]
>>> leaving_group("OTf").departing_smiles
'O=S(=O)([O-])C(F)(F)F'
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass
from functools import lru_cache

from rdkit import Chem

from cationcalc.chem.reference import load_table
from cationcalc.chem.species import InputError


@dataclass(frozen=True)
class LeavingGroup:
    """One row of the library."""

    name: str
    aliases: tuple[str, ...]
    smarts: str
    group: str  #: substituent with ``*`` at the attachment point, for the ladder ('' = not in the ladder)
    departing_smiles: str  #: canonical SMILES of what leaves from the ladder group
    departing_charge: int
    notes: str

    @property
    def pattern(self) -> Chem.Mol:
        return _pattern(self.smarts)

    @property
    def cationic_precursor(self) -> bool:
        """True when the substrate is a cation and a neutral molecule departs."""
        return self.departing_charge == 0


@lru_cache(maxsize=None)
def _pattern(smarts: str) -> Chem.Mol:
    pattern = Chem.MolFromSmarts(smarts)
    if pattern is None:
        raise ValueError(f"leaving-group SMARTS {smarts!r} does not parse")
    return pattern


@lru_cache(maxsize=1)
def library() -> tuple[LeavingGroup, ...]:
    """Every leaving group, in matching order."""
    rows = []
    for row in load_table("leaving_groups"):
        departing = Chem.CanonSmiles(row["departing_smiles"]) if row["departing_smiles"] else ""
        rows.append(LeavingGroup(row["name"], tuple(a.strip() for a in row["aliases"].split(";") if a.strip()),
                                 row["smarts"], row["group"], departing, int(row["departing_charge"]),
                                 row["notes"]))
    return tuple(rows)


def ladder_groups() -> list[LeavingGroup]:
    """The groups that have a ladder substituent (every named group)."""
    return [g for g in library() if g.group]


def describe_library() -> str:
    """One line listing every group, for error messages."""
    return ", ".join(g.name for g in library())


def leaving_group(name: str) -> LeavingGroup:
    """Look a group up by name or alias (case-insensitive); InputError suggests the closest."""
    key = name.strip().lower()
    for g in library():
        if key == g.name.lower() or key in (a.lower() for a in g.aliases):
            return g
    names = [g.name for g in library()] + [a for g in library() for a in g.aliases]
    close = difflib.get_close_matches(name.strip(), names, n=1)
    hint = f" (did you mean {close[0]!r}?)" if close else ""
    raise InputError(f"unknown leaving group {name!r}{hint}; the library knows: {describe_library()}")


@dataclass(frozen=True)
class LeavingGroupSite:
    """A C–X bond that can ionize: atom indices in the substrate as given."""

    carbon: int
    leaving_atom: int
    group: LeavingGroup


def find_leaving_groups(substrate: str | Chem.Mol, only: LeavingGroup | None = None) -> list[LeavingGroupSite]:
    """Every C–X bond the library recognises, each bond once (first matching row wins).

    A bond whose carbon lies inside another matched group is not a site of
    its own: the C–F bonds of a triflate or trifluoroacetate and the C–Br of
    a brosylate belong to the leaving group (the atoms its SMARTS matched,
    except ``:1`` and ``:3``), not to the substrate's skeleton.  Ring bonds are not sites (their heterolysis does
    not separate two species).
    """
    mol = Chem.MolFromSmiles(substrate) if isinstance(substrate, str) else substrate
    claimed: dict[tuple[int, int], LeavingGroup] = {}
    inside: dict[int, set] = {}  # atom -> groups whose matched atoms contain it
    for group in library():
        pattern = group.pattern
        tags = {a.GetAtomMapNum(): a.GetIdx() for a in pattern.GetAtoms() if a.GetAtomMapNum()}
        for match in mol.GetSubstructMatches(pattern, uniquify=False):
            bond = (match[tags[1]], match[tags[2]])
            if mol.GetBondBetweenAtoms(*bond).IsInRing():
                continue
            claimed.setdefault(bond, group)
            for position, atom in enumerate(match):
                if pattern.GetAtomWithIdx(position).GetAtomMapNum() not in (1, 3):
                    inside.setdefault(atom, set()).add(group)
    sites = [LeavingGroupSite(c, x, g) for (c, x), g in claimed.items()
             if not (inside.get(c, set()) - {g}) and (only is None or g == only)]
    return sorted(sites, key=lambda s: (s.carbon, s.leaving_atom))


def attachment_point(skeleton: str) -> tuple[Chem.Mol, int, int]:
    """Parse a skeleton written with one ``*`` on one carbon: (molecule, index of ``*``, index of that carbon).

    >>> attachment_point("CC(C)(C)*")[1:]
    (4, 1)
    """
    text = skeleton.strip()
    mol = Chem.MolFromSmiles(text)
    if mol is None:
        raise InputError(f"{text!r} is not a valid SMILES: write the skeleton with * where the leaving group "
                         "goes, e.g. CC(*)c1ccccc1")
    dummies = [a for a in mol.GetAtoms() if a.GetAtomicNum() == 0]
    if len(dummies) != 1:
        raise InputError(f"{text!r} needs exactly one attachment point * (found {len(dummies)}), "
                         "e.g. CC(*)c1ccccc1 for 1-phenylethyl")
    if dummies[0].GetDegree() != 1 or dummies[0].GetNeighbors()[0].GetSymbol() != "C":
        raise InputError(f"{text!r}: the * must hang on one carbon by a single bond, e.g. CC(C)(C)*")
    return mol, dummies[0].GetIdx(), dummies[0].GetNeighbors()[0].GetIdx()


def attach(skeleton: str, group: LeavingGroup) -> str:
    """Put a leaving group on a skeleton written with ``*`` at the attachment point.

    >>> attach("CC(*)c1ccccc1", leaving_group("chloride"))
    'CC(Cl)c1ccccc1'
    """
    mol, dummy, _ = attachment_point(skeleton)
    if not group.group:
        raise InputError(f"leaving group {group.name!r} has no ladder substituent; choose a named group")
    mol.GetAtomWithIdx(dummy).SetAtomMapNum(1)
    substituent = Chem.MolFromSmiles(group.group)
    for atom in substituent.GetAtoms():
        if atom.GetAtomicNum() == 0:
            atom.SetAtomMapNum(1)
    return Chem.MolToSmiles(Chem.molzip(mol, substituent))


__all__ = ["LeavingGroup", "LeavingGroupSite", "library", "ladder_groups", "leaving_group", "find_leaving_groups",
           "attach", "attachment_point", "describe_library"]
