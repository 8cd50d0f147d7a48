"""Electrofugality E_f and electrophilicity E of a cation from its computed hydride-ion affinity.

Both published scales are built on benzhydrylium ions: E_f (25 °C, the
electrofuge side of lg k = s_f(N_f + E_f); ``data/electrofugality.csv``) and
Mayr's E (20 °C, dichloromethane; ``data/mayr_electrophilicity.csv`` with the
2012 revisions of ``data/electrophilicity_revisions.csv``).  Each is mapped
linearly onto one computed stability descriptor, the gas-phase HIA from
isodesmic hydride exchange with tert-butyl (:data:`DESCRIPTOR_SOLVENT`), at
one of two levels, whose values for the reference cations sit in
``data/cation_descriptors.csv`` (written by benchmarks/electrofuge_calibration.py,
which also prints the comparison of candidate descriptors):

- GFN2-xTB alone, the level the rate task uses; its leave-one-out error goes
  into every record's uncertainty;
- DFT//xTB, B3LYP-D3BJ/def2-SVP single points on the GFN2-xTB structures
  with GFN2-xTB thermal corrections, computed by the benchmark with
  ``--refine`` for all 22 ions: leave-one-out MAE 0.71 (ΔG-HIA 0.69), no
  better than GFN2-xTB within the benzhydryl class, and its line puts
  tert-butyl chloride 5 log units below its published rates in water and
  80E20W (GFN2-xTB: within 0.2), so the rate task does not use it.

The gas phase was chosen over ALPB water and dichloromethane (and over ΔG of
R–Cl ionization) because it has the lowest leave-one-out error at GFN2-xTB
and, unlike the solvated descriptors, transfers to the tert-butyl cation:
tert-butyl chloride comes out within 0.2 log units of its published rates in
water and 80E20W, where the ALPB(water) line is 5.7 log units off.

A cation that belongs to a fit is never predicted by a line that contains it:
its ``E_f_computed`` comes from the fit without it (leave-one-out), so the
computed values printed for the reference cations are honest predictions.

Example
-------
>>> from cationcalc.trust.electrofuges import electrofugality_calibration
>>> cal = electrofugality_calibration()
>>> cal.n, cal.level, round(cal.loo_mae, 2)
(22, 'GFN2-xTB (gas)', 0.73)
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from cationcalc.trust.calibration import error_statistics, fit_linear, loo_residuals
from cationcalc.chem.reference import load_table
from cationcalc.chem.species import carbocation

#: medium of the descriptor: the gas phase (chosen by leave-one-out error and transfer; see the module docstring)
DESCRIPTOR_SOLVENT = "none"
#: the descriptor column: HIA (ΔH, 298 K) by hydride exchange with tert-butyl
DESCRIPTOR_QUANTITY = "hia_kcal_mol"


def canonical_cation(smiles: str) -> str:
    return carbocation(smiles, force=True).smiles


@dataclass(frozen=True)
class ScaleMember:
    name: str
    cation_smiles: str  #: canonical
    published: float
    descriptor: float
    source: str
    status: str


@dataclass(frozen=True)
class ScaleCalibration:
    """published ≈ a·descriptor + b over the benzhydrylium reference cations, with leave-one-out errors."""

    scale: str  #: 'E_f' or 'E'
    level: str
    quantity: str
    members: tuple[ScaleMember, ...]
    a: float
    b: float
    r: float
    loo_mae: float
    loo_rmse: float
    loo_max: float

    @property
    def n(self) -> int:
        return len(self.members)

    def descriptor_range(self) -> tuple[float, float]:
        values = [m.descriptor for m in self.members]
        return min(values), max(values)

    def member(self, cation_smiles: str) -> ScaleMember | None:
        key = canonical_cation(cation_smiles)
        return next((m for m in self.members if m.cation_smiles == key), None)

    def predict(self, descriptor: float, cation_smiles: str | None = None) -> float:
        """The scale value for a descriptor; a member cation is predicted by the fit without it."""
        member = self.member(cation_smiles) if cation_smiles else None
        if member is None:
            return self.a * descriptor + self.b
        rest = [m for m in self.members if m is not member]
        fit = fit_linear([m.descriptor for m in rest], [m.published for m in rest])
        return float(fit.predict(descriptor))

    def loo_table(self) -> list[dict]:
        """Per member: published, LOO prediction, error."""
        return [{"name": m.name, "cation_smiles": m.cation_smiles, "published": m.published,
                 "descriptor": m.descriptor, "predicted_loo": round(self.predict(m.descriptor, m.cation_smiles), 3),
                 "error": round(self.predict(m.descriptor, m.cation_smiles) - m.published, 3)}
                for m in self.members]


@lru_cache(maxsize=1)
def descriptor_rows() -> tuple[dict, ...]:
    return load_table("cation_descriptors")


def descriptor_level(solvent: str | None = DESCRIPTOR_SOLVENT, refine: str | None = None) -> str:
    """The level name of a descriptor as the records and the descriptor table write it.

    >>> descriptor_level(), descriptor_level(refine="B3LYP-D3BJ/def2-SVP")
    ('GFN2-xTB (gas)', 'B3LYP-D3BJ/def2-SVP//GFN2-xTB (gas)')
    """
    base = "GFN2-xTB (gas)" if solvent in (None, "", "none") else f"GFN2-xTB/ALPB({solvent})"
    return f"{refine}//{base}" if refine else base


def _descriptors(level: str, quantity: str) -> dict[str, float]:
    return {canonical_cation(r["cation_smiles"]): float(r[quantity]) for r in descriptor_rows()
            if r["level"] == level and r[quantity] not in ("", None)}


def published_electrofugalities() -> dict[str, dict]:
    """Canonical cation SMILES → row of the published E_f table."""
    return {canonical_cation(r["cation_smiles"]): r for r in load_table("electrofugality")}


def published_electrophilicities() -> dict[str, dict]:
    """Canonical cation SMILES → row of Mayr's E, benzhydrylium ions only, 2012 revisions applied."""
    rows = {canonical_cation(r["cation_smiles"]): dict(r) for r in load_table("mayr_electrophilicity")
            if "CH+" in r["name"]}
    for rev in load_table("electrophilicity_revisions"):
        key = canonical_cation(rev["cation_smiles"])
        rows[key] = {**rows.get(key, {}), **rev}
    return rows


def _calibrate(scale: str, published: dict[str, dict], column: str, level: str, quantity: str) -> ScaleCalibration:
    values = _descriptors(level, quantity)
    members = tuple(ScaleMember(row["name"], key, float(row[column]), values[key], row["source"], row["status"])
                    for key, row in published.items() if key in values)
    if len(members) < 5:
        raise ValueError(f"{scale} calibration at {level}: only {len(members)} reference cations have descriptors; "
                         "run benchmarks/electrofuge_calibration.py")
    x = np.array([m.descriptor for m in members])
    y = np.array([m.published for m in members])
    fit = fit_linear(x, y)
    stats = error_statistics(loo_residuals(x, y))
    return ScaleCalibration(scale, level, quantity, members, fit.a, fit.b, fit.r, stats["mae"], stats["rmse"],
                            stats["max"])


@lru_cache(maxsize=None)
def electrofugality_calibration(level: str | None = None, quantity: str = DESCRIPTOR_QUANTITY) -> ScaleCalibration:
    """E_f against the descriptor over the published benzhydrylium electrofuges."""
    return _calibrate("E_f", published_electrofugalities(), "E_f", level or descriptor_level(), quantity)


@lru_cache(maxsize=None)
def electrophilicity_calibration(level: str | None = None, quantity: str = DESCRIPTOR_QUANTITY) -> ScaleCalibration:
    """Mayr's E against the descriptor over the published benzhydrylium ions."""
    return _calibrate("E", published_electrophilicities(), "E", level or descriptor_level(), quantity)


@dataclass(frozen=True)
class ElectrofugeEstimate:
    """What the kinetics needs from one cation: E_f and E, computed and (where tabulated) published."""

    cation_smiles: str
    descriptor_kcal_mol: float
    E_f_computed: float
    E_f_computed_uncertainty: float  #: LOO RMSE of the calibration
    E_f: float  #: the value used: published where tabulated, else computed
    E_f_source: str
    E_f_published: bool
    E_computed: float
    E_computed_uncertainty: float
    E: float
    E_source: str
    descriptor_in_range: bool  #: inside the descriptor range of the E_f calibration
    level: str = "GFN2-xTB (gas)"  #: level of the descriptor and of both calibrations

    @property
    def E_f_uncertainty(self) -> float:
        return 0.0 if self.E_f_published else self.E_f_computed_uncertainty

    @property
    def E_uncertainty(self) -> float:
        return 0.0 if self.E_source.startswith("published") else self.E_computed_uncertainty


def estimate_electrofuge(cation_smiles: str, descriptor_kcal_mol: float, level: str | None = None) -> ElectrofugeEstimate:
    """E_f and E of a cation from its descriptor at ``level`` (default GFN2-xTB gas; published values used where
    the cation is tabulated)."""
    key = canonical_cation(cation_smiles)
    ef_cal, e_cal = electrofugality_calibration(level), electrophilicity_calibration(level)
    ef_computed = ef_cal.predict(descriptor_kcal_mol, key)
    e_computed = e_cal.predict(descriptor_kcal_mol, key)
    calibration_text = (f"computed: E_f = {ef_cal.a:.4f}·HIA + {ef_cal.b:.2f} ({ef_cal.level}, n {ef_cal.n}, "
                        f"LOO MAE {ef_cal.loo_mae:.2f})")
    published = published_electrofugalities().get(key)
    if published is not None:
        ef, ef_source = float(published["E_f"]), f"published: {published['source']}"
    else:
        ef, ef_source = ef_computed, calibration_text
    published_e = published_electrophilicities().get(key)
    if published_e is not None:
        e, e_source = float(published_e["E"]), f"published: {published_e['source']}"
    else:
        e, e_source = e_computed, (f"computed: E = {e_cal.a:.4f}·HIA + {e_cal.b:.2f} ({e_cal.level}, n {e_cal.n}, "
                                   f"LOO MAE {e_cal.loo_mae:.2f})")
    low, high = ef_cal.descriptor_range()
    return ElectrofugeEstimate(key, descriptor_kcal_mol, ef_computed, ef_cal.loo_rmse, ef, ef_source,
                               published is not None, e_computed, e_cal.loo_rmse, e, e_source,
                               low - 1.0 <= descriptor_kcal_mol <= high + 1.0, ef_cal.level)


__all__ = ["DESCRIPTOR_SOLVENT", "DESCRIPTOR_QUANTITY", "ScaleCalibration", "ScaleMember", "ElectrofugeEstimate",
           "electrofugality_calibration", "electrophilicity_calibration", "estimate_electrofuge",
           "published_electrofugalities", "published_electrophilicities", "descriptor_level", "canonical_cation"]
