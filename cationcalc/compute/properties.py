"""Properties as arithmetic over species results: HIA and heterolysis.

Nothing here computes a species; every function takes finished
:class:`~cationcalc.compute.models.SpeciesResult` objects and returns plain numbers
with every contribution shown (ΔE, ΔZPE, ΔH, −TΔS, ΔG), so a reader can see
where a number comes from.

Hydride-ion affinity (HIA, ΔH₂₉₈ of R⁺ + H⁻ → R–H, a positive number) is
computed by the isodesmic hydride exchange

    R⁺ + (ref)–H → R–H + ref⁺,   HIA(R⁺) = HIA_exp(ref⁺) − ΔH_exchange

against a reference cation with a published gas-phase HIA, so that the poorly
described free hydride never enters.  The free-energy version anchors on the
same experimental ΔH plus a computed entropy of the reference reaction:
ΔG-HIA(ref) = HIA_exp(ref) + T·[S(ref–H) − S(ref⁺) − S(H⁻)], with S(H⁻) the
ideal-gas translational entropy.  In implicit solvent the exchange energy is
the solution-phase one and the anchor stays the gas-phase experimental value:
the solution HIA is a relative scale pinned to the reference cation.

Heterolysis R–X → R⁺ + X⁻ is G(R⁺) + G(X⁻) − G(R–X) directly (the departing
anion is computed with the same method; in solution each species carries the
1 mol/L standard state, so ΔG contains it once per net species formed).

Example
-------
>>> from cationcalc.compute.properties import hydride_entropy_J_mol_K
>>> round(hydride_entropy_J_mol_K(298.15), 1)
108.8
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

from cationcalc.chem import thermo, units
from cationcalc.compute.models import SpeciesResult
from cationcalc.chem.reference import HIAReference

H_MASS_AMU = 1.00782503207 + 5.48579909065e-4  # H plus one electron mass; common practice, no source


def hydride_entropy_J_mol_K(temperature_k: float = 298.15, pressure_pa: float = 101325.0) -> float:
    """Standard entropy of gaseous H⁻ (translation only; a closed-shell ¹S ion)."""
    return float(thermo.translational_entropy_J_mol_K(H_MASS_AMU, temperature_k, pressure_pa))


@dataclass(frozen=True)
class ReactionEnergy:
    """ΔE, ΔZPE, ΔH, −TΔS and ΔG of a reaction, kcal/mol."""

    dE_kcal_mol: float
    dZPE_kcal_mol: float
    dH_kcal_mol: float
    minus_TdS_kcal_mol: float
    dG_kcal_mol: float

    def as_dict(self, prefix: str = "") -> dict[str, float]:
        return {f"{prefix}{k}" if prefix else k: v for k, v in asdict(self).items()}


def reaction_energy(products: list[SpeciesResult], reactants: list[SpeciesResult]) -> ReactionEnergy:
    """Σ products − Σ reactants for E, ZPE, H, G (kcal/mol)."""
    def total(attr, items):
        return sum(getattr(r, attr) for r in items)

    k = units.HARTREE_TO_KCAL_MOL
    d_e = (total("E_hartree", products) - total("E_hartree", reactants)) * k
    d_h = (total("H_hartree", products) - total("H_hartree", reactants)) * k
    d_g = (total("G_hartree", products) - total("G_hartree", reactants)) * k
    d_zpe = total("zpe_kcal_mol", products) - total("zpe_kcal_mol", reactants)
    return ReactionEnergy(d_e, d_zpe, d_h, d_g - d_h, d_g)


@dataclass(frozen=True)
class HydrideAffinity:
    hia_kcal_mol: float
    hia_G_kcal_mol: float
    exchange: ReactionEnergy
    reference: HIAReference
    reference_G_anchor_kcal_mol: float


def hydride_ion_affinity(cation: SpeciesResult, adduct: SpeciesResult, reference_cation: SpeciesResult,
                         reference_adduct: SpeciesResult, reference: HIAReference) -> HydrideAffinity:
    """HIA (ΔH and ΔG, kcal/mol) of a cation by hydride exchange with a reference cation."""
    exchange = reaction_energy([adduct, reference_cation], [cation, reference_adduct])
    t = reference_cation.temperature_k
    s_h = hydride_entropy_J_mol_K(t)
    d_s_ref = reference_adduct.S_J_mol_K - reference_cation.S_J_mol_K - s_h
    anchor_g = reference.hia_kcal_mol + t * d_s_ref * units.J_TO_KCAL
    return HydrideAffinity(
        hia_kcal_mol=reference.hia_kcal_mol - exchange.dH_kcal_mol,
        hia_G_kcal_mol=anchor_g - exchange.dG_kcal_mol,
        exchange=exchange, reference=reference, reference_G_anchor_kcal_mol=anchor_g)


def heterolysis_energy(substrate: SpeciesResult, cation: SpeciesResult, leaving_group: SpeciesResult) -> ReactionEnergy:
    """R–X → R⁺ + X: ΔE, ΔZPE, ΔH, −TΔS, ΔG (kcal/mol)."""
    return reaction_energy([cation, leaving_group], [substrate])
