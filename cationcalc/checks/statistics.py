"""How far a reference set is met: error statistics of an absolute set, regression of a correlation set.

* absolute set: n, MAE, RMSE, max error and mean signed error of the raw
  values, and the same after a linear calibration judged by leave-one-out
  (LOO), per-class residuals (alkyl, allylic/benzylic, aromatic,
  heteroatom-stabilized), and the stored calibration applied;
* correlation set: slope d(computed)/d(experiment), intercept, Pearson r and
  Spearman ρ; for σ⁺ ρ⁺ = −slope/(2.303RT), for pKR⁺ the ideal slope
  2.303RT.  The worst five entries are those furthest from the least-squares
  line experiment = m·computed + c, in the experiment's units.

Example
-------
>>> from cationcalc.checks.statistics import correlation_statistics
>>> stats = correlation_statistics([0.0, 1.0, 2.0, 3.0], [1.0, 3.0, 5.0, 7.0])
>>> round(stats["slope"], 6), round(stats["r"], 6), stats["n"]
(2.0, 1.0, 4)
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from scipy.stats import spearmanr

from cationcalc.checks.reference_sets import Entry, ReferenceSet
from cationcalc.chem import units
from cationcalc.chem.species import carbocation
from cationcalc.compute.models import Settings
from cationcalc.trust.calibration import (CLASS_GROUPS, Calibration, calibration_for, cation_group, error_statistics, fit_linear, loo_class_predictions,
                                          loo_predictions)

def absolute_statistics(calc: Sequence[float], exp: Sequence[float]) -> dict:
    """Errors calc − exp: n, MAE, RMSE, max, mean (kcal/mol)."""
    return error_statistics(np.asarray(calc, float) - np.asarray(exp, float))


def correlation_statistics(exp: Sequence[float], calc: Sequence[float]) -> dict:
    """Computed against experiment: slope d(calc)/d(exp), intercept, Pearson r, Spearman ρ."""
    exp = np.asarray(exp, float)
    calc = np.asarray(calc, float)
    if exp.size < 3:
        return {"n": int(exp.size), "slope": None, "intercept": None, "r": None, "spearman_rho": None}
    fit = fit_linear(exp, calc)
    return {"n": int(exp.size), "slope": fit.a, "intercept": fit.b, "r": fit.r,
            "spearman_rho": float(spearmanr(exp, calc).statistic)}


def ln10_rt(temperature_k: float) -> float:
    """2.303RT in kcal/mol: the ΔG of a factor 10 in an equilibrium constant."""
    return math.log(10.0) * units.rt_kcal_mol(temperature_k)


def _entry_row(entry: Entry, calc: float | None, record: dict | None, error: str | None = None) -> dict:
    """One row of a set in the report: the reference value beside the computed one."""
    row = {"name": entry.name, "smiles": entry.smiles, "exp": entry.value, "calc": calc, "source": entry.source,
           "status": entry.status, "note": entry.note}
    if record is not None:
        row["rearranged"] = bool(record.get("rearranged"))
        row["relaxed_smiles"] = record.get("relaxed_cation_smiles")
    if error:
        row["error"] = error
    return row


def evaluate_absolute(rs: ReferenceSet, entries: Sequence[Entry], hia: dict[str, dict], settings: Settings) -> dict:
    """One absolute set (same quantity, kcal/mol): rows, raw and LOO-calibrated errors, per class, worst five."""
    rows, used = [], []
    for e in entries:
        rec = hia.get(carbocation(e.smiles).smiles)
        if rec is None or rec.get("error"):
            rows.append(_entry_row(e, None, rec, (rec or {}).get("error", "not computed")))
            continue
        row = _entry_row(e, rec["hia_kcal_mol"], rec)
        cls, group = cation_group(e.smiles)
        row.update({"cation_class": cls, "class_group": group, "residual": rec["hia_kcal_mol"] - e.value})
        if rec.get("rearranged"):
            row["excluded_reason"] = f"relaxed to {rec.get('relaxed_cation_smiles')} at this level"
        else:
            used.append(row)
        rows.append(row)
    note = rs.note + (f"; computed in {settings.level} on the relative (gas-anchored) scale, compared with gas-phase "
                      "experiment: the differences include solvation" if settings.solvent else "")
    out = {"key": rs.key, "title": rs.title, "kind": rs.kind, "level": settings.level, "experiment": rs.experiment,
           "computed": rs.computed, "note": note, "entries": rows,
           "excluded": [{"name": e.name, "reason": e.note, "source": e.source} for e in rs.excluded]}
    calc = np.array([r["calc"] for r in used])
    exp = np.array([r["exp"] for r in used])
    out["raw"] = absolute_statistics(calc, exp)
    if len(used) >= 3:
        loo = loo_predictions(calc, exp)
        fit = fit_linear(calc, exp)
        for r, p in zip(used, loo):
            r["loo_calibrated"] = float(p)
            r["loo_residual"] = float(p - r["exp"])
        out["fit"] = {"a": fit.a, "b": fit.b, "n": fit.n}
        out["loo"] = error_statistics(loo - exp)
        by_class = loo_class_predictions(calc, exp, [r["class_group"] for r in used])
        for r, p in zip(used, by_class):
            r["class_loo_residual"] = float(p - r["exp"])
        out["class_loo"] = error_statistics(by_class - exp)
        groups = {}
        for g in CLASS_GROUPS:
            members = [r for r in used if r["class_group"] == g]
            if members:
                groups[g] = {"n": len(members), "names": [m["name"] for m in members],
                             "raw": error_statistics([m["residual"] for m in members]),
                             "loo": error_statistics([m["loo_residual"] for m in members])}
        out["groups"] = groups
    stored = calibration_for(settings)
    if stored is not None and used:
        out["stored_calibration"] = {"id": stored.id, "a": stored.a, "b": stored.b, "n": stored.n,
                                     "loo_mae": stored.loo_mae_kcal_mol, "loo_rmse": stored.loo_rmse_kcal_mol,
                                     "applied": absolute_statistics([stored.apply(r["calc"], r["class_group"]) for r in used], exp),
                                     "by_class": stored.by_class}
    out["worst"] = sorted(used, key=lambda r: -abs(r["residual"]))[:5]
    return out


def evaluate_correlation(rs: ReferenceSet, entries: Sequence[Entry], values: dict[str, tuple[float | None, dict | None, str | None]],
                          settings: Settings, calibration: Calibration | None = None) -> dict:
    """One correlation set (experiment against a computed proxy): rows, regression, worst five."""
    rows, used = [], []
    for e in entries:
        calc, rec, err = values.get(e.name, (None, None, "not computed"))
        row = _entry_row(e, calc, rec, err)
        rows.append(row)
        if calc is None:
            continue
        if rec is not None and rec.get("rearranged"):
            row["excluded_reason"] = f"relaxed to {rec.get('relaxed_cation_smiles')} at this level"
            continue
        used.append(row)
    exp = np.array([r["exp"] for r in used])
    calc = np.array([r["calc"] for r in used])
    stats = correlation_statistics(exp, calc)
    out = {"key": rs.key, "title": rs.title, "kind": rs.kind, "level": settings.level, "experiment": rs.experiment,
           "computed": rs.computed, "expected_sign": rs.expected_sign, "note": rs.note, "entries": rows,
           "excluded": [{"name": e.name, "reason": e.note, "source": e.source} for e in rs.excluded], **stats}
    if stats["slope"] is not None:
        back = fit_linear(calc, exp)  # experiment predicted from the computed value
        for r in used:
            r["residual"] = float(r["exp"] - back.predict(r["calc"]))
        out["worst"] = sorted(used, key=lambda r: -abs(r["residual"]))[:5]
        out["sign_ok"] = bool(np.sign(stats["slope"]) == rs.expected_sign)
        if rs.key.startswith("sigma"):
            out["rho_plus"] = -stats["slope"] / ln10_rt(settings.temperature_k)
        if rs.key == "pkr":
            out["ideal_slope"] = ln10_rt(settings.temperature_k)
        if calibration is not None:
            out["calibrated_slope"] = calibration.a * stats["slope"]
            out["calibration_id"] = calibration.id
    else:
        out["worst"] = []
        out["sign_ok"] = None
    return out


__all__ = ["absolute_statistics", "correlation_statistics", "ln10_rt", "evaluate_absolute", "evaluate_correlation"]
