"""Rates from published linear free-energy relationships: pure arithmetic, no quantum chemistry.

* Electrofuge–nucleofuge equation (Denegri, Streiter, Jurić, Ofial, Kronja,
  Mayr, Chem. Eur. J. 2006, 12, 1648; Streidl, Denegri, Kronja, Mayr, Acc.
  Chem. Res. 2010, 43, 1537): lg k₁(25 °C) = s_f (N_f + E_f), the first-order
  rate constant of ionization of R–X; E_f belongs to the cation R⁺, N_f and
  s_f to the leaving group X⁻ in a given medium.  Stated accuracy: ±16 % on
  167 rate constants.
* Mayr–Patz equation, lg k(20 °C) = s_N (N + E): here the pseudo-first-order
  rate at which a solvent (N₁, s_N) captures a cation of electrophilicity E,
  so the cation's lifetime is 1/k.
* Eyring equation: k at another temperature from k(298.15 K) and an
  activation enthalpy, with an uncertainty band that widens with |T − 298 K|.
* Half-lives in the units a chemist thinks in, and the time verdict
  (thresholds in ``data/half_life_verdicts.csv``).

Example
-------
>>> from cationcalc.chem.kinetics import lg_k_ionization, half_life_s, human_time
>>> lg_k = lg_k_ionization(E_f=-6.03, N_f=3.24, s_f=0.99)   # benzhydryl chloride, 80E20W
>>> round(lg_k, 2), f"{10 ** lg_k:.2g}"
(-2.76, '0.0017')
>>> human_time(half_life_s(10 ** lg_k))
'6.7 min'
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

from cationcalc.chem import units
from cationcalc.chem.reference import load_table

#: temperature of the electrofuge–nucleofuge scale (25 °C)
ELECTROFUGE_TEMPERATURE_K = 298.15
#: temperature of the Mayr–Patz scale (20 °C)
MAYR_PATZ_TEMPERATURE_K = 293.15
#: the equation's stated accuracy, ±16 % (Denegri et al. 2006), in log units
EQUATION_ERROR_LG = math.log10(1.16)
#: rate temperatures accepted, K (0–150 °C: liquid-phase solvolysis practice; the scales are at 20–25 °C)
RATE_TEMPERATURE_RANGE_K = (units.ZERO_CELSIUS_K, units.ZERO_CELSIUS_K + 150.0)
#: solvent capture faster than this (s⁻¹) leaves no free cation: the Mayr–Patz equation holds up to about
#: the diffusion limit, lg k ≈ 9–10 (value from memory of Mayr, H.; Ofial, A. R. Pure Appl. Chem. 2005, 77, 1807)
FREE_CATION_CAPTURE_LIMIT_PER_S = 1.0e10


def lg_k_ionization(E_f: float, N_f: float, s_f: float) -> float:
    """lg k₁ (s⁻¹, 25 °C) of R–X → R⁺ + X⁻ from the electrofuge–nucleofuge equation."""
    return s_f * (N_f + E_f)


def lg_k_capture(E: float, N: float, s_N: float) -> float:
    """lg k (s⁻¹, 20 °C) of a cation (E) captured by a solvent (N₁, s_N): Mayr–Patz."""
    return s_N * (N + E)


def half_life_s(k_per_s: float) -> float:
    """ln 2 / k of a first-order reaction."""
    return math.log(2.0) / k_per_s


def free_energy_of_activation_kJ_mol(k_per_s: float, temperature_k: float) -> float:
    """ΔG‡ from the Eyring equation, k = (k_B T / h) exp(−ΔG‡/RT), transmission coefficient 1."""
    prefactor = units.BOLTZMANN_J_K * temperature_k / units.PLANCK_J_S
    return units.GAS_CONSTANT_J_MOL_K * temperature_k * math.log(prefactor / k_per_s) / 1000.0


def lg_k_at_temperature(lg_k_ref: float, temperature_k: float, activation_enthalpy_kJ_mol: float,
                        reference_k: float = ELECTROFUGE_TEMPERATURE_K) -> float:
    """Eyring: lg k(T) from lg k(T_ref) with ΔH‡ and ΔS‡ taken as constant between the two temperatures."""
    slope = activation_enthalpy_kJ_mol * 1000.0 / (units.GAS_CONSTANT_J_MOL_K * math.log(10.0))
    return lg_k_ref + math.log10(temperature_k / reference_k) - slope * (1.0 / temperature_k - 1.0 / reference_k)


def temperature_band_lg(temperature_k: float, enthalpy_uncertainty_kJ_mol: float,
                        reference_k: float = ELECTROFUGE_TEMPERATURE_K) -> float:
    """Log-unit uncertainty that an uncertain ΔH‡ adds to lg k(T): zero at T_ref, growing with |1/T − 1/T_ref|."""
    return (enthalpy_uncertainty_kJ_mol * 1000.0 / (units.GAS_CONSTANT_J_MOL_K * math.log(10.0))
            * abs(1.0 / temperature_k - 1.0 / reference_k))


def combined(*log_errors: float) -> float:
    """Independent errors in log units added in quadrature."""
    return math.sqrt(sum(e * e for e in log_errors))


#: default activation entropy and its spread, J/(mol K), where no ΔH‡ is bundled: SN1 solvolyses in aqueous and
#: alcoholic media mostly show ΔS‡ between about −60 and +20 J/(mol K) (common practice, no source); the band
#: covers them.  A constant ΔH‡ ignores ΔCp‡, which for tert-butyl chloride in water-rich media is about
#: −1000 J/(mol K) (Chem. Phys. Lett. 2004, 392, 378) and makes the extrapolated k too high by about 0.1 log
#: units at +20 K and 0.4 at +40 K there.
DEFAULT_ACTIVATION_ENTROPY_J_MOL_K = (-20.0, 40.0)


@dataclass(frozen=True)
class ActivationParameters:
    """ΔH‡ (kJ/mol) with its uncertainty, and where it comes from."""

    enthalpy_kJ_mol: float
    enthalpy_uncertainty_kJ_mol: float
    source: str
    measured: bool


@lru_cache(maxsize=1)
def _activation_rows() -> tuple[dict, ...]:
    return load_table("activation_parameters")


def activation_parameters(substrate_smiles: str, medium_code: str, k_298_per_s: float) -> ActivationParameters:
    """Measured ΔH‡ for this substrate in this medium, or the documented default.

    The default takes ΔS‡ from :data:`DEFAULT_ACTIVATION_ENTROPY_J_MOL_K` and gives
    ΔH‡ = ΔG‡(298 K) + T·ΔS‡, with the ΔS‡ spread turned into a ΔH‡ spread.
    """
    from cationcalc.chem.species import species

    rows = _activation_rows()
    key = species(substrate_smiles, force=True).smiles if substrate_smiles else ""
    for row in rows:
        if row["medium"] == medium_code and species(row["substrate_smiles"]).smiles == key:
            return ActivationParameters(float(row["dH_kJ_mol"]), float(row["dH_uncertainty_kJ_mol"]),
                                        f"measured: {row['source']} [{row['status']}]", True)
    T = ELECTROFUGE_TEMPERATURE_K
    dS, spread = DEFAULT_ACTIVATION_ENTROPY_J_MOL_K
    enthalpy = free_energy_of_activation_kJ_mol(k_298_per_s, T) + T * dS / 1000.0
    return ActivationParameters(enthalpy, T * spread / 1000.0,
                                f"ΔG‡(298 K) with the default ΔS‡ = {dS:+.0f} ± {spread:.0f} J/(mol K) (project choice "
                                "covering SN1 solvolyses in aqueous and alcoholic media; constant ΔH‡, ΔCp‡ ignored)",
                                False)


def human_time(seconds: float | None) -> str:
    """A duration in the unit a chemist would say it in: '45 s', '6.6 min', '3.1 h', '12 days', '4e+03 years'."""
    if seconds is None or not math.isfinite(seconds):
        return "—"
    scales = [(units.SECONDS_PER_YEAR * 2, units.SECONDS_PER_YEAR, "years"), (units.SECONDS_PER_DAY * 2,
              units.SECONDS_PER_DAY, "days"), (units.SECONDS_PER_HOUR * 2, units.SECONDS_PER_HOUR, "h"),
              (units.SECONDS_PER_MINUTE * 2, units.SECONDS_PER_MINUTE, "min"), (1.0, 1.0, "s"),
              (1e-3, 1e-3, "ms"), (1e-6, 1e-6, "µs"), (1e-9, 1e-9, "ns"), (1e-12, 1e-12, "ps"), (0.0, 1e-15, "fs")]
    for threshold, unit, name in scales:
        if seconds >= threshold:
            value = seconds / unit
            text = f"{value:.2g}" if value < 10 else f"{value:.0f}" if value < 1e4 else f"{value:.1e}"
            return f"{text} {name}"
    return f"{seconds:.1e} s"  # pragma: no cover (negative durations are never passed)


@dataclass(frozen=True)
class TimeVerdict:
    verdict: str
    reason: str


@lru_cache(maxsize=1)
def half_life_rules() -> tuple[dict, ...]:
    """Half-life thresholds and their words, as bundled (``data/half_life_verdicts.csv``)."""
    return load_table("half_life_verdicts")


def time_verdict(half_life: float, where: str) -> TimeVerdict:
    """The words for a half-life; ``where`` names medium and temperature for the reason."""
    for rule in half_life_rules():
        if half_life <= float(rule["limit_s"]):
            return TimeVerdict(rule["verdict"], f"half-life {human_time(half_life)} {where}: {rule['meaning']}")
    raise AssertionError("the half-life table has no open-ended row")  # pragma: no cover


__all__ = ["lg_k_ionization", "lg_k_capture", "half_life_s", "lg_k_at_temperature", "temperature_band_lg",
           "free_energy_of_activation_kJ_mol", "activation_parameters", "ActivationParameters", "combined",
           "human_time", "time_verdict", "TimeVerdict", "half_life_rules", "ELECTROFUGE_TEMPERATURE_K",
           "MAYR_PATZ_TEMPERATURE_K", "EQUATION_ERROR_LG", "RATE_TEMPERATURE_RANGE_K",
           "FREE_CATION_CAPTURE_LIMIT_PER_S", "DEFAULT_ACTIVATION_ENTROPY_J_MOL_K"]
