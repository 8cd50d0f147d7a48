"""Physical constants and unit conversions: the one place they come from.

Everything is derived from :mod:`scipy.constants` (CODATA 2018).  Inside the
package, geometries are in Å and energies/forces in eV and eV/Å (ASE's
convention); reports use kcal/mol and kJ/mol.

Example
-------
>>> from cationcalc.chem import units
>>> round(units.HARTREE_TO_KCAL_MOL, 3)
627.509
>>> round(units.EV_TO_KCAL_MOL, 4)
23.0605
"""

from __future__ import annotations

from scipy import constants as _c

#: Boltzmann constant, J/K
BOLTZMANN_J_K = _c.k
#: Planck constant, J s
PLANCK_J_S = _c.h
#: speed of light, m/s
SPEED_OF_LIGHT_M_S = _c.c
#: Avogadro constant, 1/mol
AVOGADRO = _c.N_A
#: molar gas constant, J/(mol K)
GAS_CONSTANT_J_MOL_K = _c.R
#: atomic mass unit, kg
AMU_KG = _c.physical_constants["atomic mass constant"][0]
#: one standard atmosphere, Pa
ATMOSPHERE_PA = _c.atm
#: one bar, Pa
BAR_PA = _c.bar

#: Hartree in eV
HARTREE_EV = _c.physical_constants["Hartree energy in eV"][0]
#: Bohr radius in Å
BOHR_ANGSTROM = _c.physical_constants["Bohr radius"][0] * 1e10
#: thermochemical calorie, J
CALORIE_J = _c.calorie
#: 0 °C in K
ZERO_CELSIUS_K = _c.zero_Celsius
#: seconds in a minute, hour, day and Julian year (365.25 days)
SECONDS_PER_MINUTE = _c.minute
SECONDS_PER_HOUR = _c.hour
SECONDS_PER_DAY = _c.day
SECONDS_PER_YEAR = _c.Julian_year

EV_TO_J_MOL = _c.eV * AVOGADRO
EV_TO_KJ_MOL = EV_TO_J_MOL / 1000.0
EV_TO_KCAL_MOL = EV_TO_J_MOL / (1000.0 * CALORIE_J)
HARTREE_TO_KCAL_MOL = HARTREE_EV * EV_TO_KCAL_MOL
KCAL_TO_KJ = CALORIE_J
J_TO_KCAL = 1.0 / (1000.0 * CALORIE_J)
#: wavenumber (cm^-1) to eV
INVCM_EV = PLANCK_J_S * SPEED_OF_LIGHT_M_S * 100.0 / _c.eV


def kcal_to_kj(value_kcal_mol: float) -> float:
    """kcal/mol → kJ/mol (thermochemical calorie)."""
    return value_kcal_mol * KCAL_TO_KJ


def rt_kcal_mol(temperature_k: float) -> float:
    """RT in kcal/mol at the given temperature."""
    return GAS_CONSTANT_J_MOL_K * temperature_k * J_TO_KCAL
