"""The bundled reference sets of ``cationcalc check``: which published rows enter which set, and why.

* **gas-phase HIA** (absolute set, kcal/mol; ``data/gas_hydride_ion_affinities.csv``);
* **σ⁺ series** (correlation sets): HIA of para-substituted benzyl and cumyl
  cations against Brown–Okamoto σ⁺ (``data/sigma_plus.csv``), in the medium of
  the protocol (:data:`SIGMA_PLUS_MEDIUM`, ALPB(acetone), standing for the 90 %
  aqueous acetone in which σ⁺ was defined: ``sigma_benzyl_solution``,
  ``sigma_cumyl_solution``) and in the medium of the run (gas by default:
  ``sigma_benzyl``, ``sigma_cumyl``);
* **Mayr E** (correlation set, dichloromethane): HIA of the benzhydrylium
  ions in ALPB(dichloromethane) against their electrophilicity E
  (``data/mayr_electrophilicity.csv``);
* **pKR⁺** (correlation set, water): ΔG of R⁺ + OH⁻ → ROH in ALPB(water)
  against pKR⁺ (``data/pkr_plus.csv``);
* the cations of the trend checks (:data:`TREND_CATIONS`, :data:`ISOMERS`).

Each excluded row is kept with its reason (``ReferenceSet.excluded``).

Example
-------
>>> from cationcalc.checks.reference_sets import reference_sets
>>> sets = reference_sets()
>>> sets["gas_hia"].kind, len(sets["gas_hia"].entries) >= 10
('absolute', True)
>>> [e.name for e in sets["gas_hia"].excluded][:2]
['1-propyl (threshold ion)', '2-propyl (1979 value)']
>>> sets["sigma_benzyl"].expected_sign
1
>>> sets["sigma_benzyl_solution"].medium, sets["sigma_benzyl"].medium
('acetone', 'run')
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

from rdkit import Chem

from cationcalc.chem.reference import load_table
from cationcalc.chem.species import carbocation
from cationcalc.trust.uncertainty import ANCHOR_SMILES

KEISTER_1993 = "Keister, J. W.; Riley, J. S.; Baer, T. J. Am. Chem. Soc. 1993, 115, 12613"
HOULE_1979 = "Houle, F. A.; Beauchamp, J. L. J. Am. Chem. Soc. 1979, 101, 4067"
#: the 2-propyl cation's heat of formation (iPEPICO; replaces the 1979 value)
IPEPICO_2010 = "J. Phys. Chem. A 2010, 114, 11285 (iPEPICO heat of formation of i-C3H7+)"
TORMA_2019 = "Torma, K. G.; Voronova, K.; Sztaray, B.; Bodi, A. J. Phys. Chem. A 2019, 123"
LIAS_1988 = "Lias, S. G. et al. J. Phys. Chem. Ref. Data 1988, 17, Suppl. 1"
BROWN_OKAMOTO = "Brown, H. C.; Okamoto, Y. J. Am. Chem. Soc. 1958, 80, 4979"


@dataclass(frozen=True)
class Entry:
    """One reference value: a cation, its experimental figure and where it comes from."""

    name: str
    smiles: str
    value: float
    source: str
    status: str = ""
    note: str = ""


@dataclass(frozen=True)
class ReferenceSet:
    """A bundled set of published values and how it is recomputed."""

    key: str
    title: str
    kind: str  #: 'absolute' (same quantity, kcal/mol) or 'correlation' (experiment vs a computed proxy)
    medium: str  #: 'run' (the solvent of the run, gas by default) or a fixed solvent
    experiment: str  #: label of the experimental quantity
    computed: str  #: label of the computed quantity
    expected_sign: int  #: sign of d(computed)/d(experiment)
    entries: tuple[Entry, ...]
    quick: tuple[str, ...]  #: names of the entries in the --quick subset
    excluded: tuple[Entry, ...] = ()  #: rows of the table left out (note = reason)
    note: str = ""


# ------------------------------------------------------------------ the sets

def _gas_hia_set() -> ReferenceSet:
    """Gas-phase HIA rows that enter statistics and calibration.

    Left out: tert-butyl (the anchor of the hydride exchange, exact by
    construction), superseded values (the 1979 tert-butyl and 2-propyl
    figures, each replaced by a threshold-coincidence value) and the threshold-ion rows
    (1-propyl, isobutyl, neopentyl: those cations are not minima).  Kept: the
    0 K photoionization onsets of benzyl and tropylium (they differ from 298 K
    values by 1–2 kcal/mol, far below the method error).  Every row's heats of
    formation were read in the cited source (rows resting on recalled values
    were dropped from the table).  A cation that relaxes to another
    structure at the level of the run is dropped from the statistics at run
    time and listed.
    """
    entries, excluded = [], []
    for row in load_table("gas_hydride_ion_affinities"):
        name, notes = row["name"], (row.get("notes") or "").lower()
        entry = Entry(name, row["cation_smiles"], float(row["hia_kcal_mol"]), row["source"], row["status"],
                      f"T = {row['T_K']} K" + (f"; {row['notes']}" if row.get("notes") else ""))
        if "threshold" in name or "not a minimum" in notes:
            excluded.append(Entry(**{**asdict(entry), "note": "threshold ion: not a minimum"}))
        elif "superseded" in notes:
            excluded.append(Entry(**{**asdict(entry), "note": "superseded value (a later measurement replaces it)"}))
        elif Chem.CanonSmiles(row["cation_smiles"]) == Chem.CanonSmiles(ANCHOR_SMILES):
            excluded.append(Entry(**{**asdict(entry), "note": "anchor of the hydride exchange (exact by construction)"}))
        else:
            entries.append(entry)
    return ReferenceSet(
        "gas_hia", "gas-phase hydride-ion affinity", "absolute", "run", "HIA_exp / kcal/mol", "HIA_calc / kcal/mol", 1,
        tuple(entries), ("methyl", "ethyl", "2-propyl", "allyl", "acetyl (ATcT-based acetaldehyde)",
                         "trifluoromethyl", "formyl HCO+", "benzyl (0 K, onset)", "tropylium (0 K, onset)"),
        tuple(excluded), "isodesmic hydride exchange against tert-butyl (236.7 kcal/mol, " + KEISTER_1993 + ")")


def cumyl_smiles(benzyl_cation_smiles: str) -> str:
    """The para-substituted cumyl cation that belongs to a benzyl cation (two methyls on the centre).

    >>> cumyl_smiles("COc1ccc([CH2+])cc1")
    'COc1ccc([C+](C)C)cc1'
    """
    cation = carbocation(benzyl_cation_smiles)
    mol = Chem.RWMol(Chem.MolFromSmiles(cation.smiles))
    centre = mol.GetAtomWithIdx(cation.centre)
    centre.SetNoImplicit(True)
    centre.SetNumExplicitHs(0)
    for _ in range(2):
        idx = mol.AddAtom(Chem.Atom("C"))
        mol.AddBond(cation.centre, idx, Chem.BondType.SINGLE)
    out = mol.GetMol()
    Chem.SanitizeMol(out)
    return Chem.MolToSmiles(out)


def alcohol_smiles(cation_smiles: str) -> str:
    """R–OH for a cation R⁺ (hydroxide added to the cationic carbon).

    >>> alcohol_smiles("[C+](c1ccccc1)(c1ccccc1)c1ccccc1")
    'OC(c1ccccc1)(c1ccccc1)c1ccccc1'
    """
    cation = carbocation(cation_smiles)
    mol = Chem.RWMol(Chem.MolFromSmiles(cation.smiles))
    centre = mol.GetAtomWithIdx(cation.centre)
    centre.SetFormalCharge(0)
    centre.SetNoImplicit(True)
    centre.SetNumExplicitHs(centre.GetTotalNumHs())
    idx = mol.AddAtom(Chem.Atom("O"))
    mol.AddBond(cation.centre, idx, Chem.BondType.SINGLE)
    out = mol.GetMol()
    Chem.SanitizeMol(out)
    return Chem.MolToSmiles(out)


#: The medium of the σ⁺ protocol sets.  σ⁺ was defined by the solvolysis of cumyl chlorides in 90 % aqueous
#: acetone (Brown–Okamoto 1958); ALPB has no parameters for the mixture, and ALPB(acetone) stands for it (the
#: mixture is 90 % acetone by volume and its dielectric constant, about 24, is near acetone's 20.7, far from
#: water's 78.4).  Measured with GFN2-xTB, default settings (benchmarks/sigma_plus_media.py, 9 para substituents):
#: r against σ⁺ gas / ALPB(acetone) / ALPB(water) = 0.947 / 0.953 / 0.953 for the benzyl cations and
#: 0.954 / 0.957 / 0.953 for the cumyl cations; acetone gives the best r of both series and, with water, a ρ⁺
#: nearer the solvolysis value than the gas phase.  4-F comes out destabilizing (HIA above the parent's) in every
#: medium: a GFN2-xTB error the medium does not repair.
SIGMA_PLUS_MEDIUM = "acetone"


def _sigma_sets() -> tuple[ReferenceSet, ...]:
    """σ⁺ against HIA: benzyl and cumyl cations in the protocol's medium, then in the medium of the run.

    The protocol sets (``*_solution``) are computed in :data:`SIGMA_PLUS_MEDIUM`
    whatever the run's solvent, as the Mayr and pKR⁺ sets are computed in
    the media of their measurements; the run-medium sets keep the gas-phase
    figure of a default run beside them.
    """
    rows = load_table("sigma_plus")
    benzyl = tuple(Entry(f"{r['substituent']}-benzyl", r["benzyl_cation_smiles"], float(r["sigma_plus"]), r["source"],
                         r["status"]) for r in rows)
    cumyl = tuple(Entry(f"{r['substituent']}-cumyl", cumyl_smiles(r["benzyl_cation_smiles"]), float(r["sigma_plus"]),
                        r["source"], r["status"], "σ⁺ was defined by the solvolysis of these cumyl chlorides")
                  for r in rows)
    note = ("slope in kcal/mol per σ⁺ unit; ρ⁺ = −slope/(2.303RT) on the log K scale of R–H + R0⁺ ⇌ R⁺ + R0–H "
            "(negative: donors stabilise the cation)")
    solution_note = (f"{note}; ALPB({SIGMA_PLUS_MEDIUM}) stands for the 90 % aqueous acetone of the σ⁺ definition "
                     "(the protocol's medium: best r of gas, acetone and water, benchmarks/sigma_plus_media.py)")
    medium = f"ALPB({SIGMA_PLUS_MEDIUM})"
    return (
        ReferenceSet("sigma_benzyl_solution", f"σ⁺ vs HIA in {medium}, para-substituted benzyl cations",
                     "correlation", SIGMA_PLUS_MEDIUM, "σ⁺ (Brown–Okamoto)", f"HIA_calc({medium}) / kcal/mol", 1,
                     benzyl, tuple(e.name for e in benzyl), note=solution_note),
        ReferenceSet("sigma_cumyl_solution", f"σ⁺ vs HIA in {medium}, para-substituted cumyl cations",
                     "correlation", SIGMA_PLUS_MEDIUM, "σ⁺ (Brown–Okamoto)", f"HIA_calc({medium}) / kcal/mol", 1,
                     cumyl, tuple(e.name for e in cumyl), note=solution_note),
        ReferenceSet("sigma_benzyl", "σ⁺ vs gas HIA, para-substituted benzyl cations", "correlation", "run",
                     "σ⁺ (Brown–Okamoto)", "HIA_calc / kcal/mol", 1, benzyl,
                     tuple(e.name for e in benzyl), note=note),
        ReferenceSet("sigma_cumyl", "σ⁺ vs gas HIA, para-substituted cumyl cations", "correlation", "run",
                     "σ⁺ (Brown–Okamoto)", "HIA_calc / kcal/mol", 1, cumyl,
                     (), note=note))


def _mayr_set() -> ReferenceSet:
    """Benzhydrylium ions only (the E scale is defined by them; Mayr et al. 2001).

    Tropylium and tritylium are left out: they are not benzhydrylium ions, and
    the note of the tritylium row says the Mayr–Patz relation does not hold
    for such bulky electrophiles.
    """
    entries, excluded = [], []
    for r in load_table("mayr_electrophilicity"):
        e = Entry(r["name"], r["cation_smiles"], float(r["E"]), r["source"], r["status"], r.get("notes", ""))
        if "[CH+]" in r["cation_smiles"] and r["name"].endswith("CH+"):
            entries.append(e)
        else:
            excluded.append(Entry(**{**asdict(e), "note": "not a benzhydrylium ion (the reference series of the E scale)"}))
    return ReferenceSet("mayr_E", "Mayr electrophilicity E vs HIA in dichloromethane", "correlation",
                        "dichloromethane", "E (Mayr, 20 °C, CH2Cl2)", "HIA_calc(CH2Cl2) / kcal/mol", 1,
                        tuple(entries), ("(ani)(Ph)CH+", "(tol)2CH+", "Ph2CH+"), tuple(excluded),
                        "HIA by hydride exchange with tert-butyl in ALPB(dichloromethane) (relative scale)")


def _pkr_set() -> ReferenceSet:
    """pKR⁺ in aqueous acid on the H_R scale (Deno et al. 1955 and the related rows).

    Left out: the 80:20 water–methanol value of 4,4'-dimethoxytrityl (another
    medium; the Deno value of the same cation is kept) and the polarographic
    pK' of tropylium (a kinetic, not a thermodynamic, value; the Doering–Knox
    value is kept).
    """
    entries, excluded = [], []
    for r in load_table("pkr_plus"):
        cond = r["conditions"].lower()
        e = Entry(r["name"], r["cation_smiles"], float(r["pKR"]), r["source"], r["status"], r["conditions"])
        if cond.startswith("aqueous acid, h_r") or cond.startswith("aqueous h2so4"):
            entries.append(e)
        else:
            excluded.append(Entry(**{**asdict(e), "note": f"other conditions ({r['conditions'][:60]})"}))
    return ReferenceSet("pkr", "pKR⁺ vs ΔG(R⁺ + OH⁻ → ROH) in water", "correlation", "water",
                        "pKR⁺ (aqueous acid, H_R)", "ΔG(R⁺ + OH⁻ → ROH)(water) / kcal/mol", 1,
                        tuple(entries), (), tuple(excluded),
                        "ALPB(water); pKR⁺ = ΔG(R⁺ + H₂O → ROH + H⁺)/(2.303RT), which differs from the computed "
                        "ΔG by a constant; ideal slope 2.303RT = 1.36 kcal/mol per pK unit")


def reference_sets() -> dict[str, ReferenceSet]:
    """All bundled reference sets by key, in report order."""
    return {s.key: s for s in (_gas_hia_set(), *_sigma_sets(), _mayr_set(), _pkr_set())}


#: species the trend checks need beyond the sets (name → cation SMILES)
TREND_CATIONS = {
    "methyl": "[CH3+]", "ethyl": "C[CH2+]", "2-propyl": "C[CH+]C", "tert-butyl": ANCHOR_SMILES,
    "1-phenylethyl": "C[CH+]c1ccccc1", "1-methylallyl": "C=C[CH+]C", "cumyl": "C[C+](C)c1ccccc1",
    "allyl": "C=C[CH2+]", "benzyl": "[CH2+]c1ccccc1", "vinyl": "C=[CH+]", "2-propenyl": "C=[C+]C",
    "phenyl": "[c+]1ccccc1",
}
#: isomer groups for aromatic stabilization: the aromatic ion first, then its isomers
ISOMERS = {
    "C7H7+": {"tropylium": "C1=CC=C[CH+]C=C1", "benzyl": "[CH2+]c1ccccc1", "4-methylphenyl": "Cc1cc[c+]cc1"},
    "C3H3+": {"cyclopropenylium": "[CH+]1C=C1", "propargyl": "C#C[CH2+]"},
}



__all__ = ["Entry", "ReferenceSet", "reference_sets", "SIGMA_PLUS_MEDIUM", "cumyl_smiles", "alcohol_smiles", "TREND_CATIONS", "ISOMERS",
           "ANCHOR_SMILES", "KEISTER_1993", "HOULE_1979", "IPEPICO_2010", "TORMA_2019", "LIAS_1988", "BROWN_OKAMOTO"]
