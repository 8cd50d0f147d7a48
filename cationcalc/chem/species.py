"""Species from SMILES: validation, the carbenium centre, adducts and fragments.

A *species* is a closed-shell (unless asked otherwise) molecule or ion given
by SMILES.  This module turns user input into validated RDKit molecules and
builds the partners a property needs:

* :func:`carbocation` finds the one carbenium centre of a cation; an
  oxocarbenium, iminium or acylium ion written with the charge on O or N is
  mapped to its carbenium resonance form (one π pair moved onto O/N), so
  ``C=[O+]C`` and ``[CH2+]OC`` are the same species;
* :func:`hydride_adduct` adds H⁻ to the cationic carbon (R⁺ → R–H);
* :func:`heterolysis_fragments` breaks the C–X bond of a substrate, moving
  the bonding pair to the leaving group (R–X → R⁺ + X⁻; R–OH₂⁺ → R⁺ + H₂O).

Every problem raises :class:`InputError` with a one-line message naming the
input and the fix.

Example
-------
>>> from cationcalc.chem.species import carbocation, hydride_adduct
>>> cation = carbocation("C=[O+]C")
>>> cation.smiles, cation.charge
('[CH2+]OC', 1)
>>> hydride_adduct(cation).smiles
'COC'
"""

from __future__ import annotations

from dataclasses import dataclass

from rdkit import Chem, RDLogger

RDLogger.DisableLog("rdApp.*")

#: elements GFN2-xTB is parametrised for, as far as cationcalc accepts them
#: (H–Rn minus the lanthanides would be allowed by the method; organic
#: chemistry needs these, and a typo such as 'Xx' is caught by RDKit itself)
SUPPORTED_ELEMENTS = frozenset(
    "H B C N O F Si P S Cl Ge As Se Br Sn Sb Te I Li Na K Mg Ca Al Zn Cu".split()
)
#: heavy-atom limit above which a species needs force=True (cost grows ~N^2-3)
MAX_HEAVY_ATOMS = 120

HALOGENS = ("F", "Cl", "Br", "I")


class InputError(ValueError):
    """A user input that cationcalc refuses, with a one-line reason and fix."""


def clipped(text: str, limit: int = 60) -> str:
    """``text`` cut to about ``limit`` characters with its length said (a 100 kB SMILES is not echoed)."""
    text = str(text)
    return text if len(text) <= limit else text[: limit - 20] + f"… ({len(text)} characters)"


def shown(text: str, limit: int = 60) -> str:
    """``text`` quoted for a message, cut to ``limit`` characters (a 100 kB SMILES is not echoed)."""
    text = str(text)
    if len(text) <= limit:
        return repr(text)
    return repr(text[: limit - 20] + "…") + f" ({len(text)} characters)"


@dataclass(frozen=True)
class Species:
    """A validated molecule: canonical SMILES, net charge and spin multiplicity."""

    smiles: str
    charge: int
    multiplicity: int = 1

    @property
    def mol(self) -> Chem.Mol:
        return Chem.MolFromSmiles(self.smiles)

    @property
    def formula(self) -> str:
        from rdkit.Chem.rdMolDescriptors import CalcMolFormula

        return CalcMolFormula(self.mol)


@dataclass(frozen=True)
class Carbocation(Species):
    """A carbenium ion; ``centre`` is the cationic carbon's index in ``smiles``."""

    centre: int = -1


def parse(smiles: str, *, force: bool = False, allow_radicals: bool = False) -> Chem.Mol:
    """Parse and sanity-check one SMILES; raises InputError with the fix."""
    text = (smiles or "").strip()
    if not text:
        raise InputError("empty input: give a SMILES string, e.g. C[C+](C)C")
    mol = Chem.MolFromSmiles(text)
    if mol is None:
        raise InputError(f"{shown(text)} is not a valid SMILES: check brackets, ring closures and valences")
    if mol.GetNumAtoms() == 0:
        raise InputError(f"{shown(text)} contains no atoms")
    labelled = sorted({f"[{a.GetIsotope()}{a.GetSymbol()}]" for a in mol.GetAtoms() if a.GetIsotope()})
    if labelled:
        raise InputError(f"{shown(text)} carries isotope labels ({', '.join(labelled)}); cationcalc computes "
                         "with the masses of the common isotopes only: remove the labels")
    if len(Chem.GetMolFrags(mol)) > 1:
        raise InputError(f"{shown(text)} has several disconnected fragments: give one species per input")
    for atom in mol.GetAtoms():
        if atom.GetSymbol() not in SUPPORTED_ELEMENTS:
            raise InputError(
                f"{shown(text)} contains {atom.GetSymbol()}, which cationcalc does not handle; "
                f"supported elements: {' '.join(sorted(SUPPORTED_ELEMENTS))}"
            )
        if atom.GetNumRadicalElectrons() and not allow_radicals:
            raise InputError(
                f"{shown(text)} has an unpaired electron on {atom.GetSymbol()}{atom.GetIdx()} (a radical): "
                "write every hydrogen of a cation explicitly, e.g. C[CH+]C, not C[C+]C"
            )
    heavy = mol.GetNumHeavyAtoms()
    if heavy > MAX_HEAVY_ATOMS and not force:
        raise InputError(
            f"{shown(text)} has {heavy} heavy atoms, above the limit of {MAX_HEAVY_ATOMS}; pass --force to compute it anyway"
        )
    return mol


def species(smiles: str, *, multiplicity: int | None = None, force: bool = False) -> Species:
    """Any molecule or ion (neutral precursor, anion, cation) as a Species."""
    mol = parse(smiles, force=force, allow_radicals=multiplicity not in (None, 1))
    charge = Chem.GetFormalCharge(mol)
    n_electrons = sum(a.GetAtomicNum() for a in Chem.AddHs(mol).GetAtoms()) - charge
    if multiplicity is None:
        multiplicity = sum(a.GetNumRadicalElectrons() for a in mol.GetAtoms()) + 1
    if (n_electrons + multiplicity - 1) % 2:
        raise InputError(
            f"{shown(smiles)}: {n_electrons} electrons cannot have spin multiplicity {multiplicity}; "
            "check the charge and the hydrogens"
        )
    return Species(Chem.MolToSmiles(mol), charge, int(multiplicity))


def freeze_hydrogens(mol: Chem.RWMol) -> None:
    """Make every atom's hydrogen count explicit so that bond edits keep it."""
    for atom in mol.GetAtoms():
        n_h = atom.GetTotalNumHs()
        atom.SetNoImplicit(True)
        atom.SetNumExplicitHs(n_h)


def _carbenium_form(mol: Chem.Mol, text: str) -> tuple[Chem.Mol, int]:
    """The resonance form with the positive charge on carbon, and that carbon's index."""
    # charge-separated neutral groups (nitro, N-oxides: N+ bonded to O-) are not the cationic centre
    def zwitterionic(atom):
        return any(n.GetFormalCharge() * atom.GetFormalCharge() < 0 for n in atom.GetNeighbors())

    positive = [a for a in mol.GetAtoms() if a.GetFormalCharge() > 0 and not zwitterionic(a)]
    negative = [a for a in mol.GetAtoms() if a.GetFormalCharge() < 0 and not zwitterionic(a)]
    if len(positive) != 1 or Chem.GetFormalCharge(mol) != 1 or negative or positive[0].GetFormalCharge() != 1:
        raise InputError(
            f"{shown(text)} is not a monocation with one charged atom (net charge {Chem.GetFormalCharge(mol):+d}); "
            "give a carbocation such as C[C+](C)C"
        )
    atom = positive[0]
    if atom.GetSymbol() == "C":
        return mol, atom.GetIdx()
    if atom.GetSymbol() not in ("O", "N", "S"):
        raise InputError(f"{shown(text)} has its positive charge on {atom.GetSymbol()}: no cationic carbon to study")
    # onium ion: move one pi pair of the O=C / N=C (or O#C) bond onto the heteroatom
    for bond in atom.GetBonds():
        other = bond.GetOtherAtom(atom)
        order = bond.GetBondType()
        if other.GetSymbol() != "C" or order not in (Chem.BondType.DOUBLE, Chem.BondType.TRIPLE):
            continue
        rw = Chem.RWMol(mol)
        Chem.Kekulize(rw, clearAromaticFlags=True)
        freeze_hydrogens(rw)
        rw_bond = rw.GetBondBetweenAtoms(atom.GetIdx(), other.GetIdx())
        rw_bond.SetBondType(Chem.BondType.SINGLE if order == Chem.BondType.DOUBLE else Chem.BondType.DOUBLE)
        rw.GetAtomWithIdx(atom.GetIdx()).SetFormalCharge(0)
        rw.GetAtomWithIdx(other.GetIdx()).SetFormalCharge(1)
        form = rw.GetMol()
        Chem.SanitizeMol(form)
        return form, other.GetIdx()
    raise InputError(
        f"{shown(text)}: the charge on {atom.GetSymbol()} has no carbenium resonance form "
        "(it needs a double or triple bond from the charged atom to carbon)"
    )


def carbocation(smiles: str, *, force: bool = False) -> Carbocation:
    """Validate a carbocation SMILES and locate its carbenium centre.

    >>> carbocation("C[C+](C)C").centre
    1
    """
    mol = parse(smiles, force=force)
    mol, centre = _carbenium_form(mol, smiles.strip())
    # canonical SMILES with the centre tracked through an atom map
    tagged = Chem.Mol(mol)
    tagged.GetAtomWithIdx(centre).SetIntProp("cationcalc_centre", 1)
    canonical = Chem.MolToSmiles(tagged)
    order = list(tagged.GetPropsAsDict(True, True)["_smilesAtomOutputOrder"])
    new_centre = order.index(centre)
    return Carbocation(canonical, 1, 1, new_centre)


def hydride_adduct(cation: Carbocation) -> Species:
    """R–H: the neutral formed when hydride adds to the cationic carbon."""
    mol = Chem.RWMol(Chem.MolFromSmiles(cation.smiles))
    atom = mol.GetAtomWithIdx(cation.centre)
    atom.SetFormalCharge(0)
    atom.SetNumExplicitHs(atom.GetTotalNumHs() + 1)
    atom.SetNoImplicit(True)
    try:
        Chem.SanitizeMol(mol)
    except Exception as exc:  # pragma: no cover - valence problems are caught earlier
        raise InputError(f"{shown(cation.smiles)}: cannot add hydride to the cationic carbon ({exc})") from exc
    return Species(Chem.MolToSmiles(mol), 0, 1)


@dataclass(frozen=True)
class Heterolysis:
    """R–X → R⁺ + X: the substrate, the carbocation and the departing group."""

    substrate: Species
    cation: Carbocation
    leaving_group: Species
    carbon_index: int
    leaving_atom_index: int
    leaving_group_name: str


def halide_sites(mol: Chem.Mol) -> list[tuple[int, int]]:
    """(carbon, halogen) index pairs for every carbon–halogen bond."""
    pairs = []
    for atom in mol.GetAtoms():
        if atom.GetSymbol() in HALOGENS and atom.GetDegree() == 1 and atom.GetFormalCharge() == 0:
            neighbour = atom.GetNeighbors()[0]
            if neighbour.GetSymbol() == "C":
                pairs.append((neighbour.GetIdx(), atom.GetIdx()))
    return pairs


def split_bond(substrate: Chem.Mol, carbon: int, leaving_atom: int) -> tuple[Chem.Mol, Chem.Mol]:
    """Break C–X heterolytically: the bonding pair leaves with X.

    The carbon's formal charge rises by one and the leaving atom's falls by
    one, which is right for anionic (Cl⁻) and neutral (H₂O from R–OH₂⁺)
    departing groups alike.  Returns (cation, departing group) molecules.
    """
    rw = Chem.RWMol(substrate)
    freeze_hydrogens(rw)
    bond = rw.GetBondBetweenAtoms(carbon, leaving_atom)
    if bond is None or bond.GetBondType() != Chem.BondType.SINGLE:
        raise InputError("the leaving group must be joined to carbon by a single bond")
    rw.RemoveBond(carbon, leaving_atom)
    c_atom, x_atom = rw.GetAtomWithIdx(carbon), rw.GetAtomWithIdx(leaving_atom)
    c_atom.SetFormalCharge(c_atom.GetFormalCharge() + 1)
    x_atom.SetFormalCharge(x_atom.GetFormalCharge() - 1)
    for atom in (c_atom, x_atom):
        atom.SetIsAromatic(atom.GetIsAromatic())
    mol = rw.GetMol()
    Chem.SanitizeMol(mol)
    frags = Chem.GetMolFrags(mol, asMols=True, sanitizeFrags=True, frags=(frag_of := []))
    cation = frags[frag_of[carbon]]
    leaving = frags[frag_of[leaving_atom]]
    return cation, leaving


def heterolysis_fragments(smiles: str, *, force: bool = False) -> Heterolysis:
    """R–X → R⁺ + X⁻ for an alkyl/aryl halide; an atom map picks one of several halogens.

    >>> h = heterolysis_fragments("CC(C)(C)Cl")
    >>> h.cation.smiles, h.leaving_group.smiles
    ('C[C+](C)C', '[Cl-]')
    """
    text = (smiles or "").strip()
    mol = parse(text, force=force)
    if Chem.GetFormalCharge(mol) != 0:
        raise InputError(f"{shown(text)} is charged; heterolysis of halides starts from a neutral R–X")
    sites = halide_sites(mol)
    if not sites:
        raise InputError(f"{shown(text)} has no carbon–halogen bond: give a substrate R–X with X = F, Cl, Br or I")
    mapped = [s for s in sites if mol.GetAtomWithIdx(s[1]).GetAtomMapNum()]
    if len(sites) > 1:
        if len(mapped) != 1:
            listing = ", ".join(f"{mol.GetAtomWithIdx(x).GetSymbol()} (atom {x})" for _, x in sites)
            raise InputError(
                f"{shown(text)} has {len(sites)} leaving groups: {listing}; mark the one to break with an atom map, "
                "e.g. ClCC[Br:1]"
            )
        sites = mapped
    carbon, halogen = sites[0]
    for atom in mol.GetAtoms():
        atom.SetAtomMapNum(0)
    cation_mol, leaving_mol = split_bond(mol, carbon, halogen)
    cation = carbocation(Chem.MolToSmiles(cation_mol), force=True)
    leaving = species(Chem.MolToSmiles(leaving_mol))
    substrate = species(Chem.MolToSmiles(mol), force=True)
    name = {"F": "fluoride", "Cl": "chloride", "Br": "bromide", "I": "iodide"}[mol.GetAtomWithIdx(halogen).GetSymbol()]
    return Heterolysis(substrate, cation, leaving, carbon, halogen, name)
