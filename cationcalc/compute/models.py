"""Typed, validated, serialisable models: settings and species results.

:class:`Settings` is everything that determines a computed species besides
the species itself (engine, method, solvent, temperature, conformer and
optimiser settings, thermochemistry options).  :class:`SpeciesResult` is what
computing one species gives: geometry, energies, thermochemistry, charges,
conformer ensemble, warnings and provenance.  Both round-trip through JSON,
and :func:`species_key` hashes everything that determines a result, so a
result can be stored and reused.

Example
-------
>>> from cationcalc.compute.models import Settings, species_key
>>> s = Settings(solvent="CH2Cl2")
>>> s.solvent
'dichloromethane'
>>> len(species_key("C[C+](C)C", 1, 1, s))
64
"""

from __future__ import annotations

import hashlib
import json
from typing import Annotated, Literal

from pydantic import AfterValidator, BaseModel, ConfigDict, Field, field_validator

from cationcalc.about import __version__
from cationcalc.chem.conformers import ConformerSettings, has_cationic_carbon

#: temperatures (K) the thermochemistry accepts.  Below ~50 K the classical (high-temperature)
#: rotational partition function used here fails for light species (rotational temperature of H2
#: 88 K, of CH3+ about 10 K); above ~3000 K molecules fall apart on the time scale of a vibration and
#: a harmonic oscillator over a 3 kcal/mol conformer window describes nothing.  The range covers
#: superacid NMR work (-150 C, 123 K) up to flash pyrolysis (~1500 K).  Common practice, no source.
TEMPERATURE_RANGE_K = (50.0, 3000.0)
#: gas-phase standard pressures (Pa) the ideal-gas translational entropy is used for: 1 Pa to
#: 10 MPa (100 bar); beyond that a real gas departs from the ideal-gas law the entropy assumes.
#: Common practice, no source.
PRESSURE_RANGE_PA = (1.0, 1.0e7)


def check_temperature_k(value: float) -> float:
    """``value`` as a float inside TEMPERATURE_RANGE_K; ValueError (one line, with the range) otherwise."""
    low, high = TEMPERATURE_RANGE_K
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"temperature {value!r} is not a number; give kelvin between {low:g} and {high:g}") from None
    if not low <= number <= high:  # also refuses NaN
        raise ValueError(f"temperature {value!r} K is outside {low:g}-{high:g} K, the range where the "
                         "thermochemistry means something; give kelvin in that range")
    return number


def check_pressure_pa(value: float) -> float:
    """``value`` as a float inside PRESSURE_RANGE_PA; ValueError (one line, with the range) otherwise."""
    low, high = PRESSURE_RANGE_PA
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"pressure {value!r} is not a number; give pascal between {low:g} and {high:g}") from None
    if not low <= number <= high:
        raise ValueError(f"pressure {value!r} Pa is outside {low:g}-{high:g} Pa, where the ideal-gas standard "
                         "state holds; give pascal in that range (101325 = 1 atm)")
    return number


#: a temperature field (K) checked against TEMPERATURE_RANGE_K, wherever a model declares one
TemperatureK = Annotated[float, AfterValidator(check_temperature_k)]
#: a pressure field (Pa) checked against PRESSURE_RANGE_PA
PressurePa = Annotated[float, AfterValidator(check_pressure_pa)]

from cationcalc.engines.solvents import normalise_solvent


class Settings(BaseModel):
    """Method and numerical settings shared by every species of a run."""

    model_config = ConfigDict(frozen=True, extra="forbid")

    engine: Literal["tblite", "xtb"] = Field("tblite", description="GFN2-xTB implementation")
    method: Literal["GFN2-xTB"] = "GFN2-xTB"
    solvent: str | None = Field(None, description="implicit solvent name, None for the gas phase")
    temperature_k: TemperatureK = Field(298.15, description="K, within TEMPERATURE_RANGE_K")
    pressure_pa: PressurePa = Field(101325.0, description="gas-phase standard pressure (1 atm), within PRESSURE_RANGE_PA")
    fmax_ev_per_angstrom: float = Field(0.01, gt=0)
    max_steps: int = Field(500, ge=1)
    optimizer: Literal["LBFGS", "BFGS", "FIRE", "PreconLBFGS"] = Field(
        "LBFGS", description="ASE optimiser; PreconLBFGS needs about 30 % fewer gradients (benchmarks/optimizers.py) "
                             "but stays opt-in: it finds the neopentyl cation not a minimum where LBFGS keeps it")
    scf_max_iterations: int = Field(250, ge=1)
    conformers: ConformerSettings = ConformerSettings()
    hessian_step_angstrom: float = Field(0.005, gt=0)
    hessian_difference: Literal["central", "forward"] = Field(
        "central", description="finite differences of the numerical Hessian: 'central' (6N gradients, error of "
                               "order h²) or 'forward' (3N + 1, error of order h).  Forward is a benchmark knob, "
                               "not offered in workflows: on the drug-like set it cut Hessian gradients by 24 % but "
                               "its spurious imaginary modes added 19 % optimisation gradients in mode following, "
                               "and ΔG_ion moved by up to 1.6 kcal/mol (benchmarks/README.md)")
    hessian_conformers: Literal["all", "lowest", "none"] = Field(
        "lowest", description="conformers that get a numerical Hessian: 'lowest' (the others of the window take "
                              "its vibrational thermal correction, their own rotational part), 'all', or 'none' "
                              "(electronic energies only: the site and shift screening level)")
    qrrho: bool = Field(True, description="Grimme quasi-RRHO entropy for low modes")
    qrrho_cutoff_cm1: float = Field(100.0, gt=0)
    qrrho_alpha: float = Field(4.0, gt=0)
    qrrho_average_moment_kg_m2: float = Field(1e-44, gt=0)
    imaginary_threshold_cm1: float = Field(50.0, ge=0, description="imaginary modes smaller than this are followed")
    max_mode_follows: int = Field(3, ge=0)
    enantiomer_mixing: bool = Field(False, description="add R ln 2 to S of chiral species")
    symmetry_tolerance_angstrom: float = Field(0.1, gt=0)

    @field_validator("solvent", mode="before")
    @classmethod
    def _solvent(cls, value):
        return normalise_solvent(value)

    def full_protocol(self) -> "Settings":
        """These settings with the full protocol: a Hessian on every conformer of the window, LBFGS."""
        return self.model_copy(update={"hessian_conformers": "all", "optimizer": "LBFGS"})

    def screening(self) -> "Settings":
        """The screening level of these settings: the lowest single-point conformer optimised loosely, no Hessian.

        Electronic energies only: used to rank ionization sites and shift products before the chosen
        few get the protocol of these settings.
        """
        conformers = self.conformers.model_copy(update={"n_optimize": 1})
        return self.model_copy(update={"hessian_conformers": "none", "conformers": conformers,
                                       "fmax_ev_per_angstrom": max(self.fmax_ev_per_angstrom, SCREENING_FMAX)})

    @property
    def solvent_model(self) -> str | None:
        if self.solvent is None:
            return None
        return "GBSA" if self.engine == "xtb" else "ALPB"

    @property
    def level(self) -> str:
        """The level of theory as the trade writes it, e.g. GFN2-xTB/ALPB(water)."""
        if self.solvent is None:
            return f"{self.method} (gas)"
        return f"{self.method}/{self.solvent_model}({self.solvent})"


#: settings added after results were first stored, with the value that reproduces what was computed before
#: they existed: at that value a setting stays out of the store key, so stored results keep their keys (a
#: dotted name reaches into a nested model: ``conformers.centre_torsion_steps``)
KEY_NEUTRAL_SETTINGS = {"hessian_conformers": "all", "conformers.centre_torsion_steps": 0,
                        "hessian_difference": "central"}
#: settings that change only carbocations (a carbon of formal charge +1): left out of every other species'
#: key, so neutral precursors, anions and leaving groups keep their stored results whatever their value
CARBOCATION_ONLY_SETTINGS = ("conformers.centre_torsion_steps",)
#: force threshold (eV/Å) of the screening optimisation (loose: a ranking, not a final structure)
SCREENING_FMAX = 0.05


def species_key(smiles: str, charge: int, multiplicity: int, settings: Settings) -> str:
    """SHA-256 of everything that determines a species result."""
    dumped = settings.model_dump(mode="json")
    for path, neutral in KEY_NEUTRAL_SETTINGS.items():
        *parents, name = path.split(".")
        holder = dumped
        for parent in parents:
            holder = holder.get(parent, {})
        if holder.get(name, neutral) == neutral or (path in CARBOCATION_ONLY_SETTINGS
                                                    and not has_cationic_carbon(smiles)):
            holder.pop(name, None)
    payload = {
        "smiles": smiles, "charge": int(charge), "multiplicity": int(multiplicity),
        "settings": dumped, "version": __version__,
    }
    return hashlib.sha256(json.dumps(payload, sort_keys=True).encode()).hexdigest()


class ConformerRecord(BaseModel):
    """One optimised conformer of a species."""

    model_config = ConfigDict(allow_inf_nan=False)

    energy_hartree: float
    relative_energy_kcal_mol: float
    gibbs_kcal_mol: float | None = None
    weight: float = 0.0
    #: 2 when this chiral conformer's mirror image (same G) is counted without being sampled
    mirror_images: int = 1
    converged: bool = True
    bonding_changed: bool = False
    note: str = ""


class Profile(BaseModel):
    """Where the time of one species went."""

    wall_s: float = 0.0
    engine_s: float = 0.0
    gradients: dict[str, int] = Field(default_factory=dict)


class SpeciesResult(BaseModel):
    """Everything computed for one species at one level of theory (NaN and infinity are refused)."""

    model_config = ConfigDict(allow_inf_nan=False)

    smiles: str
    charge: int
    multiplicity: int
    formula: str
    key: str
    level: str
    engine: str
    solvent: str | None
    temperature_k: float
    numbers: list[int]
    positions_angstrom: list[list[float]]
    partial_charges: list[float]
    E_hartree: float = Field(description="electronic energy (incl. implicit solvation) of the lowest conformer")
    zpe_kcal_mol: float
    H_hartree: float = Field(description="enthalpy, Boltzmann average over the ensemble")
    G_hartree: float = Field(description="Gibbs free energy of the ensemble, standard state included")
    S_J_mol_K: float
    standard_state_correction_kcal_mol: float = 0.0
    symmetry_number: int = 1
    point_group: str = "C1"
    frequencies_cm1: list[float] = Field(default_factory=list)
    imaginary_frequencies_cm1: list[float] = Field(default_factory=list)
    conformers: list[ConformerRecord] = Field(default_factory=list)
    n_embedded: int = 0
    rearranged: bool = False
    relaxed_smiles: str | None = None
    bonding_change: str = ""
    warnings: list[str] = Field(default_factory=list)
    profile: Profile = Field(default_factory=Profile)
    version: str = __version__
