"""Typed task records: one pydantic model per task on a shared base, a failure as a typed record.

Every key a task can put in a record is a declared field, described once,
with its unit in its name (``hia_kcal_mol``, ``k_ion_per_s``).  A record
keeps the keys it was made with, in the order they were made (the order of
the JSON and CSV output), and holds its values exactly as computed: the
models check the keys and their types but never convert a value (an ``int``
temperature stays an ``int``).  A record reads like a read-only dict
(``r["hia_kcal_mol"]``, ``r.get(...)``, ``"error" in r``, ``dict(r)``);
:meth:`Record.to_dict` and ``model_dump()`` give the flat dict of today's
keys.  Nothing rewrites a record in place: calibration and DFT refinement
(:func:`cationcalc.trust.uncertainty.annotate`,
:mod:`cationcalc.execution.refine`) return new flat records, which
:func:`~cationcalc.tasks.runner.run_task` types once, at its end
(:func:`typed_records`); :meth:`Record.with_values` gives a changed copy.

Keys that come in families: the GFN2-xTB twin a DFT refinement keeps beside
each refined value (``hia_kcal_mol`` → ``hia_xtb_kcal_mol``, the rule of
:func:`~cationcalc.execution.refine.xtb_key`) is declared from the field
group it twins (:class:`HiaValues` → ``HiaValuesXtbTwins``); the raw values
a calibration keeps (``hia_raw_kcal_mol``) and the error bars are declared
in :class:`CalibrationFields`.

Example
-------
>>> r = typed_record("thermo", {"input": "O", "name": "water", "method": "GFN2-xTB", "engine": "tblite",
...                             "solvent": "none", "solvent_model": "none", "level": "GFN2-xTB (gas)",
...                             "temperature_k": 298.15, "symmetry_number": 2})
>>> type(r).__name__, r["symmetry_number"], list(r)[-1], "error" in r
('ThermoRecord', 2, 'symmetry_number', False)
>>> failed = typed_record("thermo", {**dict(r), "error": "no conformer embedded"})
>>> type(failed).__name__, isinstance(failed, Failure), list(failed)[-1]
('ThermoFailure', True, 'error')
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from functools import lru_cache
from typing import Any, Iterable

from pydantic import BaseModel, ConfigDict, Field, PrivateAttr, create_model, model_serializer

from cationcalc.execution.refine import xtb_key
from cationcalc.tasks.registry import SpecField

def _d(text: str, default: Any = None) -> Any:
    """An optional field described once."""
    return Field(default, description=text)


# ---------------------------------------------------------------- the base


class Record(BaseModel, Mapping):
    """A record: declared fields, the keys it was made with (in order), read like a read-only dict."""

    model_config = ConfigDict(frozen=True, extra="forbid", protected_namespaces=())
    _keys: tuple[str, ...] = PrivateAttr(default=())

    @classmethod
    def from_dict(cls, values: Mapping[str, Any]) -> "Record":
        """The record of ``values``: keys and types checked, values and key order kept exactly."""
        data = dict(values)
        cls.model_validate(data)  # raises on an undeclared key or a value of the wrong type
        record = cls.model_construct(**data)
        record._keys = tuple(data)
        return record

    def to_dict(self) -> dict[str, Any]:
        """The flat dict of today's keys, in the order the record was made."""
        return {key: getattr(self, key) for key in self._keys}

    def with_values(self, values: Mapping[str, Any] | None = None, drop: Iterable[str] = ()) -> "Record":
        """A new record: ``drop`` removed, ``values`` set (a new key goes last); this one unchanged."""
        gone = set(drop)
        data = {k: v for k, v in self.to_dict().items() if k not in gone}
        data.update(values or {})
        return type(self).from_dict(data)

    @model_serializer(mode="plain")
    def _serialise(self) -> dict[str, Any]:
        return self.to_dict()

    def __getitem__(self, key: str) -> Any:
        if key in self._keys:
            return getattr(self, key)
        raise KeyError(key)

    def __iter__(self) -> Iterator[str]:  # type: ignore[override]  # keys, as a Mapping iterates
        return iter(self._keys)

    def __len__(self) -> int:
        return len(self._keys)

    def __eq__(self, other: object) -> bool:
        if isinstance(other, Mapping):
            return self.to_dict() == dict(other.items())
        return NotImplemented

    __hash__ = None  # type: ignore[assignment]

    def __repr_args__(self):
        return list(self.to_dict().items())


# ---------------------------------------------------------------- field groups


class Inputs(Record):
    """What every record starts with: the input and the level it was computed at."""

    task: str | None = _d("task that made the record (ionization and rate tasks, and every study record)")
    input: str = Field(description="the input as given (SMILES, or skeleton with * for ladder)")
    name: str = Field(description="the name given with the input ('' when none)")
    method: str = Field(description="electronic-structure method of the species (GFN2-xTB)")
    engine: str = Field(description="engine that ran the method (tblite or xtb)")
    solvent: str = Field(description="implicit solvent, 'none' for gas phase")
    solvent_model: str = Field(description="implicit solvent model (ALPB, GBSA), 'none' for gas phase")
    level: str = Field(description="level of the values, e.g. 'GFN2-xTB/ALPB(water)' or a DFT//xTB composite")
    temperature_k: float = Field(description="temperature of the thermochemistry, K")


class Outcome(Record):
    """What happened on the way: warnings, a cation that was not a minimum, where the time went."""

    rearranged: bool | None = _d("the cation is not a minimum at this level: it relaxed to another structure")
    relaxed_cation_smiles: str | None = _d("SMILES of the structure the cation relaxed to (None when it did not)")
    warnings: list[str] | None = _d("warnings about this record, most important first")
    profile: dict[str, Any] | None = _d("time spent: wall_s, engine_s, gradients per kind (barriers_s with NEB)")


class Failure(Record):
    """A failed request: the error, and whatever the record knew before it failed."""

    error: str = Field(description="why there is no value (input rejected, species failed, refinement failed)")


class RefinementFields(Record):
    """Keys a DFT refinement adds (the GFN2-xTB values sit beside the refined ones as ``*_xtb_*`` keys)."""

    xtb_level: str | None = _d("GFN2-xTB level the structures and the *_xtb_* values come from")
    refine_level: str | None = _d("DFT level of the single points (None: not refined, GFN2-xTB values)")
    refine_solvation: str | None = _d("how solvation enters the refined energies")
    refine_note: str | None = _d("what was refined and how (DFT//xTB composite), or why not")
    refine_seconds: float | None = _d("seconds spent on the DFT single points of this record, s")


class CalibrationFields(Record):
    """Error bars, the calibration applied to HIA, and the raw values kept beside the calibrated ones."""

    hia_uncertainty_kcal_mol: float | None = _d("RMS error bar of hia_kcal_mol, kcal/mol")
    hia_G_uncertainty_kcal_mol: float | None = _d("RMS error bar of hia_G_kcal_mol, kcal/mol")
    dHIA_vs_tert_butyl_uncertainty_kcal_mol: float | None = _d("RMS error bar of dHIA_vs_tert_butyl_kcal_mol")
    hia_vs_best_uncertainty_kcal_mol: float | None = _d("error bar of hia_vs_best_kcal_mol (a difference)")
    hia_vs_best_uncertainty_basis: str | None = _d("where the hia_vs_best error bar comes from")
    dG_ion_uncertainty_kcal_mol: float | None = _d("error bar of dG_ion_kcal_mol (the cation's HIA error)")
    ddG_ion_uncertainty_kcal_mol: float | None = _d("error bar of ddG_ion_kcal_mol (a difference)")
    ddG_ion_uncertainty_basis: str | None = _d("where the ddG_ion error bar comes from")
    ddG_ion_vs_tert_butyl_uncertainty_kcal_mol: float | None = _d("error bar of ddG_ion_vs_tert_butyl_kcal_mol")
    ddG_ion_vs_tert_butyl_uncertainty_basis: str | None = _d("where the ddG_ion_vs_tert_butyl error bar comes from")
    dG_ion_vs_best_uncertainty_kcal_mol: float | None = _d("error bar of dG_ion_vs_best_kcal_mol (a difference)")
    dG_ion_vs_best_uncertainty_basis: str | None = _d("where the dG_ion_vs_best error bar comes from")
    dG_het_uncertainty_kcal_mol: float | None = _d("error bar of dG_het_kcal_mol (the cation's HIA error)")
    dH_het_uncertainty_kcal_mol: float | None = _d("error bar of dH_het_kcal_mol (the cation's HIA error)")
    uncertainty_basis: str | None = _d("what the error bars are and which residuals they come from")
    calibrated: bool | None = _d("the HIA values are calibrated against the gas-phase HIA set")
    calibration_id: str | None = _d("id of the calibration applied (calibration.csv)")
    calibration: str | None = _d("the calibration line applied, with its n and leave-one-out RMSE")
    calibration_note: str | None = _d("why the values were not calibrated")
    hia_raw_kcal_mol: float | None = _d("hia_kcal_mol before calibration, kcal/mol")
    hia_G_raw_kcal_mol: float | None = _d("hia_G_kcal_mol before calibration, kcal/mol")
    dHIA_vs_tert_butyl_raw_kcal_mol: float | None = _d("dHIA_vs_tert_butyl_kcal_mol before calibration, kcal/mol")
    hia_vs_best_raw_kcal_mol: float | None = _d("hia_vs_best_kcal_mol before calibration, kcal/mol")


class HiaReference(Record):
    """The anchor of the hydride exchange."""

    reference: str | None = _d("name of the reference cation the HIA is anchored on")
    reference_hia_kcal_mol: float | None = _d("experimental gas-phase HIA of the reference cation, kcal/mol")
    reference_source: str | None = _d("where the reference HIA comes from")
    reference_status: str | None = _d("how the reference HIA was checked")
    reference_choice: str | None = _d("how the anchor was chosen: 'nearest class' (tert-butyl for GFN2-xTB values, "
                                      "the class anchor for DFT-refined ones: acylium ions on acetyl) or 'given'")


class HiaValues(Record):
    """Hydride-ion affinity of a cation (isodesmic hydride exchange with the reference)."""

    hia_kcal_mol: float | None = _d("hydride-ion affinity (ΔH of R⁺ + H⁻ → RH, sign: energy released), kcal/mol")
    hia_kJ_mol: float | None = _d("hydride-ion affinity, kJ/mol")
    hia_G_kcal_mol: float | None = _d("free-energy hydride-ion affinity (ΔG), kcal/mol")
    hia_G_kJ_mol: float | None = _d("free-energy hydride-ion affinity (ΔG), kJ/mol")
    dE_exchange_kcal_mol: float | None = _d("electronic energy of the hydride exchange with the reference, kcal/mol")
    dZPE_exchange_kcal_mol: float | None = _d("zero-point energy change of the hydride exchange, kcal/mol")
    dH_exchange_kcal_mol: float | None = _d("enthalpy of the hydride exchange, kcal/mol")
    minus_TdS_exchange_kcal_mol: float | None = _d("−TΔS of the hydride exchange, kcal/mol")
    dG_exchange_kcal_mol: float | None = _d("free energy of the hydride exchange, kcal/mol")
    dHIA_vs_tert_butyl_kcal_mol: float | None = _d("HIA minus the tert-butyl cation's HIA, kcal/mol")


class HeterolysisValues(Record):
    """R–X → R⁺ + X⁻ energies of the heterolysis task."""

    dE_het_kcal_mol: float | None = _d("electronic heterolysis energy, kcal/mol")
    dZPE_het_kcal_mol: float | None = _d("zero-point energy change of the heterolysis, kcal/mol")
    dH_het_kcal_mol: float | None = _d("heterolysis enthalpy, kcal/mol")
    minus_TdS_het_kcal_mol: float | None = _d("−TΔS of the heterolysis, kcal/mol")
    dG_het_kcal_mol: float | None = _d("heterolysis free energy, kcal/mol")
    dH_het_kJ_mol: float | None = _d("heterolysis enthalpy, kJ/mol")
    dG_het_kJ_mol: float | None = _d("heterolysis free energy, kJ/mol")


class IonizationValues(Record):
    """ΔG_ion of an ionization site, against a reference substrate and tert-butyl."""

    dE_ion_kcal_mol: float | None = _d("electronic ionization energy, kcal/mol")
    dH_ion_kcal_mol: float | None = _d("ionization enthalpy, kcal/mol")
    minus_TdS_ion_kcal_mol: float | None = _d("−TΔS of the ionization, kcal/mol")
    dG_ion_kcal_mol: float | None = _d("ionization free energy ΔG_ion, kcal/mol")
    dG_ion_kJ_mol: float | None = _d("ionization free energy ΔG_ion, kJ/mol")
    dG_ion_reference_kcal_mol: float | None = _d("ΔG_ion of the reference substrate, kcal/mol")
    ddG_ion_kcal_mol: float | None = _d("ΔG_ion minus the reference substrate's, kcal/mol")
    ddG_ion_kJ_mol: float | None = _d("ΔG_ion minus the reference substrate's, kJ/mol")
    ddG_ion_vs_tert_butyl_kcal_mol: float | None = _d("ΔG_ion minus tert-butyl's with the same leaving group")


class ThermoValues(Record):
    """Thermochemistry of one species."""

    E_hartree: float | None = _d("electronic energy, hartree")
    zpe_kcal_mol: float | None = _d("zero-point energy, kcal/mol")
    H_kcal_mol: float | None = _d("thermal enthalpy correction (H − E), kcal/mol")
    G_kcal_mol: float | None = _d("thermal free-energy correction (G − E), kcal/mol")
    H_hartree: float | None = _d("enthalpy, hartree")
    G_hartree: float | None = _d("free energy, hartree")
    standard_state_correction_kcal_mol: float | None = _d("1 atm → 1 mol/L correction in G, kcal/mol")


class RateValues(Record):
    """The kinetic keys with an energy unit (a refinement keeps GFN2-xTB twins of them)."""

    descriptor_hia_kcal_mol: float | None = _d("gas-phase HIA the E_f descriptor is computed from, kcal/mol")
    activation_enthalpy_kJ_mol: float | None = _d("activation enthalpy ΔH‡ used to carry lg k to the temperature")


def _with_xtb_twins(values: type[Record]) -> type[Record]:
    """A field group with, for each of ``values``' fields, its GFN2-xTB twin (``*_xtb_*``) declared."""
    twins = {xtb_key(name): (float | None, Field(None, description=f"GFN2-xTB value of {name}, kept beside "
                                                                          "the DFT-refined one"))
             for name in values.model_fields}
    return create_model(f"{values.__name__}XtbTwins", __base__=Record, __module__=__name__, **twins)


HiaXtb = _with_xtb_twins(HiaValues)
HeterolysisXtb = _with_xtb_twins(HeterolysisValues)
IonizationXtb = _with_xtb_twins(IonizationValues)
ThermoXtb = _with_xtb_twins(ThermoValues)
RateXtb = _with_xtb_twins(RateValues)


class Site(Record):
    """Where an ionization happens: substrate, cation, leaving group, atom."""

    substrate_smiles: str | None = _d("canonical SMILES of the substrate R–X")
    cation_smiles: str | None = _d("canonical SMILES of the cation R⁺")
    leaving_group: str | None = _d("name of the leaving group X")
    leaving_group_smiles: str | None = _d("SMILES of the departing group (X⁻ or neutral X)")
    site_atom: int | None = _d("index of the carbon that becomes cationic")
    equivalent_atoms: list[int] | None = _d("symmetry-equivalent site atoms")
    protonated_oxygen: int | None = _d("index of the oxygen protonated in acid mode (None otherwise)")
    cation_class: str | None = _d("structural class of the cation (tertiary, benzylic (secondary), …)")


class Judgement(Record):
    """The verdict in words, with its reason."""

    verdict: str | None = _d("plausibility verdict (equilibrium, or in time when a rate exists)")
    verdict_reason: str | None = _d("why the verdict")


class IonizationNotes(Record):
    reference_substrate: str | None = _d("SMILES of the substrate ΔΔG_ion is measured against")
    equilibrium_factor: float | None = _d("exp(−ΔΔG_ion/RT): ratio of ionization equilibrium constants")
    standard_state: str | None = _d("standard state of the free energies")
    solvation_note: str | None = _d("what implicit solvent misses ('' in gas phase)")
    equilibrium_note: str | None = _d("what the equilibrium factor is (not a rate ratio)")


class Ranking(Record):
    """Rank within one input's sites (or leaving groups) and the gap to the best."""

    site_kind: str | None = _d("heterolysis, or hydride abstraction (no leaving group)")
    rank: int | None = _d("1 = most favourable (flagged and relaxing cations after the others)")
    dG_ion_vs_best_kcal_mol: float | None = _d("ΔG_ion minus the best site's, kcal/mol")
    hia_vs_best_kcal_mol: float | None = _d("HIA minus the best site's, kcal/mol")


class ShiftScreen(Record):
    """The downhill 1,2-shifts of the cation formed (ionize/sites with the shift screen)."""

    shifts: list[dict[str, Any]] | None = _d("1,2-shifts of the cation (flagged ones for ionize/sites; all for "
                                             "the shifts task), keys as in `cationcalc shifts`")
    sink_smiles: str | None = _d("most stable cation reached by shifts (None when none is lower)")
    degenerate_shifts: list[str] | None = _d("shifts that give the same cation again")
    shift_summary: str | None = _d("the flagged shifts in one line")
    rearrangement: str | None = _d("does the cation rearrange: the downhill shift and degenerate shifts in words")


class Kinetics(RateValues):
    """Rate constant, half-life and cation lifetime in a solvolysis medium."""

    medium: str | None = _d("solvolysis medium code (80E20W, 97% TFE (w/w), …)")
    rate_temperature_k: float | None = _d("temperature of the rate constant, K")
    medium_name: str | None = _d("the medium in words")
    rate_class: str | None = _d("class the applicability rules speak of (diarylmethyl, tertiary, …)")
    descriptor_level: str | None = _d("level of the HIA descriptor and of the E_f and E calibrations used "
                                      "(GFN2-xTB (gas), or a DFT//xTB level of the descriptor table)")
    applicability: str | None = _d("is the class inside the rate model's calibration, and why")
    applicability_status: str | None = _d("calibrated, checked, uncalibrated class or outside the SN1 model")
    E_f: float | None = _d("electrofugality of the cation used (published where tabulated)")
    E_f_computed: float | None = _d("electrofugality computed from the HIA descriptor")
    E_f_computed_uncertainty: float | None = _d("uncertainty of E_f_computed (LOO RMSE of its calibration)")
    E_f_source: str | None = _d("where E_f comes from")
    N_f: float | None = _d("nucleofugality of the leaving group in the medium")
    s_f: float | None = _d("nucleofuge-specific sensitivity in the medium")
    nucleofugality_source: str | None = _d("where N_f and s_f come from, with their status")
    nucleofugality_estimated: bool | None = _d("N_f is estimated, not published for this medium")
    N_f_fit_range: str | None = _d("E_f range of the N_f fit")
    lg_k_ion_computed: float | None = _d("lg k₁/s⁻¹ from the computed E_f")
    lg_k_ion_computed_uncertainty: float | None = _d("uncertainty of lg_k_ion_computed, log units")
    activation_source: str | None = _d("where ΔH‡ comes from")
    rate_note: str | None = _d("the equations behind the rate, or why there is no rate")
    lg_k_capture: float | None = _d("lg k/s⁻¹ of capture of the cation by the medium (Mayr–Patz, 20 °C)")
    k_capture_per_s: float | None = _d("rate constant of capture by the medium, s⁻¹")
    lifetime_s: float | None = _d("lifetime of the cation in the medium (1/k_capture), s")
    lifetime_text: str | None = _d("the lifetime in words")
    N1: float | None = _d("nucleophilicity N₁ of the medium")
    s_N: float | None = _d("nucleophile-specific sensitivity s_N of the medium")
    capture_temperature_k: float | None = _d("temperature of the capture rate (Mayr–Patz), K")
    nucleophilicity_source: str | None = _d("where N₁ and s_N come from, or why there are none")
    E: float | None = _d("electrophilicity E of the cation used (published where tabulated)")
    E_computed: float | None = _d("electrophilicity computed from the HIA descriptor")
    E_source: str | None = _d("where E comes from")
    free_cation: bool | None = _d("the cation lives long enough to be a free intermediate")
    kinetic_notes: list[str] | None = _d("extrapolations and estimates behind the rate")
    k_ion_per_s: float | None = _d("ionization rate constant k₁, s⁻¹ (None outside the SN1 model)")
    lg_k_ion: float | None = _d("lg k₁/s⁻¹ at the rate temperature")
    lg_k_ion_uncertainty: float | None = _d("uncertainty of lg_k_ion, log units")
    half_life_s: float | None = _d("half-life of the substrate (ln 2/k₁), s")
    lg_k_ion_text: str | None = _d("lg k₁ with its uncertainty, or the SN1-only lower bound")
    half_life_text: str | None = _d("the half-life in words ('—' without a rate)")
    half_life_range_text: str | None = _d("the half-life range the uncertainty spans")
    rate_verdict: str | None = _d("verdict in time (half-life)")
    rate_verdict_reason: str | None = _d("why the verdict in time")
    k_ion_sn1_only_per_s: float | None = _d("SN1-only rate constant, a lower bound outside the SN1 model, s⁻¹")
    equilibrium_verdict: str | None = _d("the equilibrium verdict, kept when the verdict speaks in time")
    equilibrium_verdict_reason: str | None = _d("why the equilibrium verdict")
    half_life_rank: int | None = _d("ladder: rank by half-life, 1 = fastest")


# ---------------------------------------------------------------- one model per task


class HiaRecord(CalibrationFields, RefinementFields, HiaXtb, HiaValues, HiaReference, Outcome, Inputs):
    """``hia``: hydride-ion affinity of a carbocation."""

    cation_smiles: str | None = _d("canonical SMILES of the cation")
    adduct_smiles: str | None = _d("canonical SMILES of its hydride adduct RH")
    hia_anchor: str | None = _d("what the HIA is anchored on")
    cation_point_group: str | None = _d("point group of the cation's lowest conformer")


class HeterolysisRecord(CalibrationFields, RefinementFields, HeterolysisXtb, HeterolysisValues, Outcome, Inputs):
    """``heterolysis``: R–X → R⁺ + X⁻ at the given level."""

    substrate_smiles: str | None = _d("canonical SMILES of the substrate R–X")
    cation_smiles: str | None = _d("canonical SMILES of the cation R⁺")
    leaving_group: str | None = _d("name of the leaving group")
    leaving_group_smiles: str | None = _d("SMILES of the leaving group X⁻")
    site_atom: int | None = _d("index of the carbon that becomes cationic")
    standard_state: str | None = _d("standard state of the free energies")


class ThermoRecord(CalibrationFields, RefinementFields, ThermoXtb, ThermoValues, Outcome, Inputs):
    """``thermo``: thermochemistry of one species."""

    smiles: str | None = _d("canonical SMILES of the species")
    charge: int | None = _d("total charge")
    multiplicity: int | None = _d("spin multiplicity")
    formula: str | None = _d("molecular formula")
    S_J_mol_K: float | None = _d("entropy, J/(mol K)")
    symmetry_number: int | None = _d("rotational symmetry number")
    point_group: str | None = _d("point group of the lowest conformer")
    lowest_frequencies_cm1: list[float] | None = _d("six lowest vibrational frequencies, cm⁻¹")
    imaginary_frequencies_cm1: list[float] | None = _d("imaginary frequencies left (negative), cm⁻¹")
    conformers: list[dict[str, Any]] | None = _d("conformers in the window: dE_kcal_mol, weight, bonding_changed")
    relaxed_smiles: str | None = _d("SMILES the species relaxed to (None when it kept its bonding)")


class Screening(Record):
    """Sites the funnel ranked at the screening level and did not compute in full."""

    screened: bool | None = _d("true: this site was screened out (outside the site window) and has no ΔG_ion")
    screen_gap_kcal_mol: float | None = _d("how far above the best site this site was at the screening level "
                                           "(one conformer, no Hessian; sites of an input with several), kcal/mol")
    dE_ion_screen_kcal_mol: float | None = _d("ΔE_ion at the screening level (heterolysis sites), kcal/mol")


class _IonizationBase(CalibrationFields, RefinementFields, Kinetics, ShiftScreen, IonizationXtb, IonizationValues,
                      IonizationNotes, Judgement, Site, Screening, Outcome, Inputs):
    """Keys shared by the ionize, sites and ladder records."""


class IonizeRecord(_IonizationBase):
    """``ionize``: the most favourable ionization of each substrate, with the others as alternatives."""

    alternatives: list[dict[str, Any]] | None = _d("the other sites: site_atom, leaving_group, cation_smiles, "
                                                   "dG_ion_kcal_mol, verdict, error (and for a "
                                                   "screened-out site the screening keys)")


class SitesRecord(Ranking, HiaXtb, HiaValues, HiaReference, _IonizationBase):
    """``sites``: one symmetry-distinct ionization site (heterolysis or hydride abstraction), ranked."""


class LadderRecord(Ranking, _IonizationBase):
    """``ladder``: one leaving group on a skeleton, ranked by ΔG_ion, against published solvolysis rates."""

    skeleton: str | None = _d("the skeleton with * at the attachment point")
    solvolysis_k_rel: float | None = _d("published relative solvolysis rate of 1-phenylethyl-X for this group")
    spearman_rho_vs_solvolysis: float | None = _d("Spearman ρ of −ΔG_ion against lg k_rel over the common groups")
    solvolysis_n: int | None = _d("number of leaving groups in the comparison")
    solvolysis_source: str | None = _d("where the relative rates come from")
    solvolysis_status: str | None = _d("how the relative rates were checked")
    ladder_note: str | None = _d("why the kinetic order need not follow ΔG_ion")


class RateRecord(RefinementFields, RateXtb, Kinetics, Judgement, Site, Outcome, Inputs):
    """``rate``: rate constant, half-life and cation lifetime of one ionization site in a medium."""

    sites_outside_the_model: list[str] | None = _d("sites skipped: aryl, vinylic, methyl or primary beside a real one")
    sites_without_nucleofugality: list[str] | None = _d("sites skipped: no N_f of their leaving group in the medium")
    rank: int | None = _d("1 = fastest site of the substrate")


class ShiftsRecord(ShiftScreen, Outcome, Inputs):
    """``shifts``: the 1,2-shifts of a carbocation, their driving forces and where a cascade ends."""

    cation_smiles: str | None = _d("canonical SMILES of the parent cation")
    parent_relaxation: str | None = _d("what the bonding guard saw happen to the parent, in shift terms")
    threshold_kcal_mol: float | None = _d("a shift is flagged when ΔG < −threshold, kcal/mol")
    flagged_summary: str | None = _d("the flagged shifts in one line ('none')")
    sink_dE_kcal_mol: float | None = _d("ΔE of the sink relative to the parent, kcal/mol")
    sink_dH_kcal_mol: float | None = _d("ΔH of the sink relative to the parent, kcal/mol")
    sink_dG_kcal_mol: float | None = _d("ΔG of the sink relative to the parent, kcal/mol")
    path: list[dict[str, Any]] | None = _d("steps to the sink: from_smiles, to_smiles, kind, dG_kcal_mol, …")
    path_text: str | None = _d("the path in one line")
    path_highest_kcal_mol: float | None = _d("highest point of the path relative to the parent (a lower bound "
                                             "to the cascade's barrier), kcal/mol")
    path_barrier_note: str | None = _d("why the path's highest point is unknown ('' when known)")
    search: dict[str, Any] | None = _d("the search: depth, ceiling_kcal_mol, max_species, species_computed, truncated")
    skipped: list[Any] | None = _d("shifts not enumerated, with the reason")


class OpenRecord(Outcome, Inputs):
    """The record of a task that declares no model of its own: the shared keys typed, its own keys as they are."""

    model_config = ConfigDict(extra="allow")


@lru_cache(maxsize=None)
def failure_model(model: type[Record]) -> type[Record]:
    """The failure model of a record model: a required ``error`` and the keys the task knew before it failed."""
    name = model.__name__.replace("Record", "Failure")
    return type(name, (Failure, model), {"__module__": __name__,
                                          "__doc__": "A failed request: the error and what was known."})


#: task name → its record model, as each task's spec declares it (read afresh from the registry)
MODELS = SpecField("record")


class _Failures(Mapping):
    """Task name → the failure model of its record model."""

    def __getitem__(self, task: str) -> type[Record]:
        return failure_model(MODELS[task] or OpenRecord)

    def __iter__(self):
        return iter(MODELS)

    def __len__(self) -> int:
        return len(MODELS)


#: task name → its failure model (a failure carries the keys its task knew before it failed)
FAILURES = _Failures()
HiaFailure, HeterolysisFailure, ThermoFailure, IonizeFailure, SitesFailure, LadderFailure, RateFailure, \
    ShiftsFailure = (failure_model(m) for m in (HiaRecord, HeterolysisRecord, ThermoRecord, IonizeRecord, SitesRecord,
                                                 LadderRecord, RateRecord, ShiftsRecord))


def typed_record(task: str, values: Mapping[str, Any]) -> Record:
    """The typed record of one task's flat record (its failure model when it carries an ``error``)."""
    if isinstance(values, Record):
        return values
    model = MODELS[task] or OpenRecord
    return (failure_model(model) if values.get("error") is not None else model).from_dict(values)


def typed_records(task: str, records: Iterable[Mapping[str, Any]]) -> list[Record]:
    """Every record of a task typed (order kept)."""
    return [typed_record(task, r) for r in records]


__all__ = ["Record", "Failure", "OpenRecord", "MODELS", "FAILURES", "failure_model", "typed_record", "typed_records",
           
           "HiaRecord", "HeterolysisRecord", "ThermoRecord", "IonizeRecord", "SitesRecord", "LadderRecord",
           "RateRecord", "ShiftsRecord", "HiaFailure", "HeterolysisFailure", "ThermoFailure", "IonizeFailure",
           "SitesFailure", "LadderFailure", "RateFailure", "ShiftsFailure"]
