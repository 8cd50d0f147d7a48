"""An uncertainty on every computed HIA and ΔG, and the calibrated HIA on request.

:func:`annotate` returns new records (the ones given are not changed) with
``<quantity>_uncertainty_kcal_mol`` beside every quantity the record carries
(``hia``, ``hia_G``, ``dHIA_vs_tert_butyl``, ``hia_vs_best``, ``dG_ion``,
``ddG_ion``, ``ddG_ion_vs_tert_butyl``, ``dG_ion_vs_best`` for sites,
``dH_het``, ``dG_het``), plus
``uncertainty_basis`` saying where the number comes from.  All error bars
are *root-mean-square* errors (kcal/mol), read from the residuals stored with
the calibration of the level of theory (``data/calibration_residuals.csv``,
computed − experiment for the bundled gas-phase HIA set; see
:mod:`cationcalc.trust.calibration`):

* **HIA, raw**: the RMS raw error of the cation's class group (alkyl,
  allylic/benzylic, aromatic, heteroatom-stabilized, other) when the group
  has at least three reference cations, else of the whole set.  The raw
  values are biased (too high for every reference cation), so the RMS, which
  includes the bias, is the honest error bar.  ΔG-HIA carries the same bar
  (the error is in the electronic structure, not in the entropy).
* **HIA, calibrated** (``calibrated=True``): the leave-one-out RMS error of
  the calibration, per class group as above.  The usual keys then hold the
  calibrated values (``hia_kcal_mol``, ``hia_kJ_mol``, and ``hia_G_kcal_mol``
  shifted by the same correction), the raw ones are kept as
  ``hia_raw_kcal_mol`` / ``hia_G_raw_kcal_mol``, and the record says
  ``calibrated: true`` with ``calibration_id``.  Only HIA is calibrated: the
  calibration was fitted to HIA, and there is no experimental set for ΔG_ion;
  other records say ``calibrated: false`` with a note.
* **ΔG_ion, ΔG_het, ΔH_het**: there is no experimental set for these.  The
  cation dominates the error (the neutral substrate and the leaving group are
  ordinary closed-shell molecules), so the bar is the RMS HIA error of the
  cation's class group — an estimate that leaves out leaving-group and
  solvation errors (so it is not an upper bound).
* **differences** (``ddG_ion``, ``*_vs_best``, ``dHIA_vs_tert_butyl``): the
  error of a difference between cations R and R' is the RMS of e_R − e_R'
  over the reference residuals of their groups,
  √(var_A + var_B + (mean_A − mean_B)²); for two cations of one group the
  common bias cancels and this is √2·σ of the group (the scatter after
  removing the mean bias), smaller than either absolute error when the bias
  dominates.  Against tert-butyl — the anchor of the hydride exchange, whose
  error is zero by construction — it is the RMS error of R's group; a
  species against itself has zero.
* **ladder** rows compare one cation with different leaving groups: the
  cation error cancels, and nothing measured bounds the leaving-group part,
  so ``dG_ion_vs_best`` there carries no bar (``dG_ion`` does).

In a solvent with no calibration of its own the gas-phase residuals are used
and ``uncertainty_basis`` says so: the solvated HIA is a relative scale
anchored on a gas-phase value, and no solution-phase HIA data exist to check
it against; ``--calibrated`` then leaves the values raw and says why
(a gas-phase line does not transfer to a solvated relative scale).
:func:`format_value` gives the ``233 ± 6`` display string.

Example
-------
>>> from cationcalc.trust.uncertainty import annotate, format_value
>>> from cationcalc.compute.models import Settings
>>> rec = {"task": "hia", "cation_smiles": "[CH2+]c1ccccc1", "hia_kcal_mol": 255.35, "hia_G_kcal_mol": 247.9}
>>> out = annotate("hia", [rec], Settings())[0]
>>> out["hia_uncertainty_kcal_mol"] > 0, out["calibrated"]
(True, False)
>>> cal = annotate("hia", [dict(rec)], Settings(), calibrated=True)[0]
>>> cal["calibrated"], cal["hia_raw_kcal_mol"], cal["hia_kcal_mol"] < 255.35
(True, 255.35, True)
>>> format_value(233.4, 6.2)
'233 ± 6'
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

from cationcalc.chem import units
from cationcalc.compute.models import Settings
from cationcalc.trust.calibration import Calibration, calibration_for, class_group, gas_calibration

#: quantity → kind of error bar
ABSOLUTE_HIA = ("hia", "hia_G")
CATION_BOUND = ("dG_ion", "dG_het", "dH_het")
ANCHOR_SMILES = "C[C+](C)C"


def format_value(value: float, uncertainty: float | None, digits: int = 0) -> str:
    """'233 ± 6' (the error bar rounded like the value)."""
    if uncertainty is None:
        return f"{value:.{digits}f}"
    return f"{value:.{digits}f} ± {uncertainty:.{digits}f}"


def _group_of(record: dict, smiles_key: str = "cation_smiles") -> str | None:
    smiles = record.get(smiles_key)
    cls = record.get("cation_class")
    if smiles is None:
        return None
    if not cls or smiles_key != "cation_smiles":
        try:
            from cationcalc.trust.calibration import cation_group

            return cation_group(smiles)[1]
        except (ValueError, RuntimeError):
            return None
    return class_group(cls, smiles)


def _canonical_cation(smiles: str | None) -> str | None:
    if not smiles:
        return None
    try:
        from cationcalc.chem.species import carbocation

        return carbocation(smiles).smiles
    except (ValueError, RuntimeError):
        return None


def _absolute(cal: Calibration, group: str | None, kind: str) -> float:
    mean, var, _, _ = cal.error_model(group, kind)
    return math.sqrt(var + mean * mean)


def _residuals(cal: Calibration, group: str | None, kind: str):
    """The group's residuals (its own when it has enough reference cations, else the whole set's) and its name."""
    from cationcalc.trust.calibration import MIN_GROUP_N

    e = cal.group_residuals(group, kind) if group else None
    if e is None or e.size < MIN_GROUP_N:
        return cal.group_residuals(None, kind), "whole set"
    return e, group


def pair_difference_rms(cal: Calibration, group_a: str | None, group_b: str | None,
                        kind: str = "raw") -> tuple[float, int, str]:
    """RMS of e_i − e_j over every pair of reference residuals (i from group A, j from group B).

    The error of a computed difference between a cation of group A and one of
    group B: a bias shared by the two groups cancels.  Every ordered pair is
    counted (a residual with itself too), the plug-in estimate that matches the
    population variance behind the absolute error bars; it equals
    √(var_A + var_B + (mean_A − mean_B)²), and √2·σ within one group.
    Returns (RMS, number of pairs, groups used).
    """
    a, name_a = _residuals(cal, group_a, kind)
    b, name_b = _residuals(cal, group_b, kind)
    diffs = [x - y for x in a for y in b]
    label = f"{name_a} pairs" if name_a == name_b else f"{name_a} × {name_b} pairs"
    if not diffs:
        return 0.0, 0, label
    return math.sqrt(sum(d * d for d in diffs) / len(diffs)), len(diffs), label


def _relative(cal: Calibration, group_a: str | None, group_b: str | None, kind: str = "raw") -> float:
    """RMS error of a difference between a cation of group A and one of group B (from residual pairs)."""
    return pair_difference_rms(cal, group_a, group_b, kind)[0]


def _difference_basis(cal: Calibration, group_a: str | None, group_b: str | None, kind: str) -> str:
    rms, n, label = pair_difference_rms(cal, group_a, group_b, kind)
    return (f"RMS of the difference of residuals over {n} {label} of reference cations "
            f"(calibration_residuals.csv, {cal.id}); a bias shared by the two cations cancels")


def _reference_cation(record: dict) -> str | None:
    """Cation SMILES of the substrate ΔΔG_ion is measured against (None when unknown)."""
    text = record.get("reference_substrate")
    if not text:
        return None
    try:
        from cationcalc.chem.ionization import heterolysis_sites

        sites = heterolysis_sites(text, force=True)
    except (ValueError, RuntimeError):
        return None
    wanted = [s for s in sites if s.leaving_group == record.get("leaving_group")] or sites
    return wanted[0].cation.smiles if wanted else None


def _round(value: float) -> float:
    return round(float(value), 1)


@dataclass(frozen=True)
class _Bars:
    """What every record of one annotate call shares: the calibration, how it is used, the best sites."""

    task: str
    cal: Calibration
    can_calibrate: bool     # a calibration is stored for this level (not only the gas-phase fallback)
    calibrated: bool        # calibration asked for
    kind: str               # "loo" (calibrated) or "raw": which residuals give the HIA bars
    basis_note: str
    level: str
    best: dict              # input → (class group, canonical cation) of its rank-1 record


def annotate(task: str, records: list[Mapping], settings: Settings, calibrated: bool = False) -> list[dict]:
    """New records with ``<quantity>_uncertainty_kcal_mol`` on every value; HIA calibrated on request.

    The records given are not changed: each annotated record is a new flat
    dict with the keys of the old one, in their order, then the new keys
    (a calibrated value keeps its place, its raw value is added as
    ``<quantity>_raw_kcal_mol``).  Records with an ``error`` come back as
    they were.  See the module notes for what each error bar is.
    """
    cal = calibration_for(settings)
    can_calibrate = cal is not None
    basis_note = ""
    if cal is None:
        cal = gas_calibration(settings.method)
        if cal is None:
            return [r if r.get("error") else {**r, "uncertainty_basis": "no calibration data bundled for this "
                                              "method: no error bars", "calibrated": False} for r in records]
        basis_note = (f"; no calibration at {settings.level}: gas-phase residuals used (the solvated HIA is a "
                      "relative scale, no solution-phase data to check it against)")
    best = {r.get("input", ""): (_group_of(r), _canonical_cation(r.get("cation_smiles")))
            for r in records if r.get("rank") == 1 and not r.get("error")}
    bars = _Bars(task, cal, can_calibrate, calibrated, "loo" if calibrated and can_calibrate else "raw",
                 basis_note, settings.level, best)
    return [r if r.get("error") else _annotated(dict(r), bars) for r in records]


def _annotated(r: dict, bars: _Bars) -> dict:
    """One record with its error bars, in the order the keys are added (``r`` is a fresh copy)."""
    group = _group_of(r)
    cation = _canonical_cation(r.get("cation_smiles"))
    did_calibrate = False
    if r.get("hia_kcal_mol") is not None:
        if bars.calibrated and bars.can_calibrate and cation != ANCHOR_SMILES:
            r.update(_calibrated_hia(r, bars.cal, group))
            did_calibrate = True
        r.update(_hia_bars(r, 0.0 if cation == ANCHOR_SMILES else _absolute(bars.cal, group, bars.kind)))
    for q in CATION_BOUND:
        if r.get(f"{q}_kcal_mol") is not None:
            r[f"{q}_uncertainty_kcal_mol"] = _round(_absolute(bars.cal, group, "raw"))
    r.update(_ddg_bars(r, bars.cal, group, cation))
    for q in ("hia", "dG_ion"):
        if r.get(f"{q}_vs_best_kcal_mol") is not None and bars.task != "ladder":
            r.update(_vs_best_bars(r, q, bars, group, cation, did_calibrate))
    if not any(k.endswith("_uncertainty_kcal_mol") for k in r):
        if bars.calibrated:  # e.g. thermo records: no HIA or ΔG to put a bar on or to calibrate
            r.update({"calibrated": False, "calibration_note": "no HIA in this record: nothing to calibrate"})
        return r
    r.update(_basis(bars, group, did_calibrate, cation == ANCHOR_SMILES))
    return r


def _calibrated_hia(r: Mapping, cal: Calibration, group: str | None) -> dict:
    """The calibrated HIA values, each raw value kept beside (in the order the keys are written)."""
    raw = float(r["hia_kcal_mol"])
    corrected = cal.apply(raw, group)
    out = {"hia_raw_kcal_mol": raw, "hia_kcal_mol": round(corrected, 2),
           "hia_kJ_mol": round(units.kcal_to_kj(corrected), 1)}
    if r.get("hia_G_kcal_mol") is not None:
        shifted = float(r["hia_G_kcal_mol"]) + (corrected - raw)
        out.update({"hia_G_raw_kcal_mol": r["hia_G_kcal_mol"], "hia_G_kcal_mol": round(shifted, 2)})
        if "hia_G_kJ_mol" in r:
            out["hia_G_kJ_mol"] = round(units.kcal_to_kj(shifted), 1)
    if r.get("dHIA_vs_tert_butyl_kcal_mol") is not None:
        out["dHIA_vs_tert_butyl_raw_kcal_mol"] = r["dHIA_vs_tert_butyl_kcal_mol"]
        if r.get("reference_hia_kcal_mol") is not None:
            out["dHIA_vs_tert_butyl_kcal_mol"] = round(corrected - float(r["reference_hia_kcal_mol"]), 2)
    return out


def _hia_bars(r: Mapping, u: float) -> dict:
    """The HIA error bar on HIA, ΔG-HIA and ΔHIA against tert-butyl (the same error)."""
    out = {"hia_uncertainty_kcal_mol": _round(u)}
    if r.get("hia_G_kcal_mol") is not None:
        out["hia_G_uncertainty_kcal_mol"] = _round(u)
    if r.get("dHIA_vs_tert_butyl_kcal_mol") is not None:
        out["dHIA_vs_tert_butyl_uncertainty_kcal_mol"] = _round(u)
    return out


def _ddg_bars(r: Mapping, cal: Calibration, group: str | None, cation: str | None) -> dict:
    """Error bars of ΔΔG_ion (against the reference substrate) and of ΔΔG_ion against tert-butyl."""
    out = {}
    if r.get("ddG_ion_kcal_mol") is not None:
        ref = _reference_cation(r)
        if ref is None or ref == cation:
            u = 0.0 if ref == cation and ref is not None else _absolute(cal, group, "raw")
        elif ref == ANCHOR_SMILES:
            u = _absolute(cal, group, "raw")
        else:
            u = _relative(cal, group, _group_of({"cation_smiles": ref}), "raw")
        out["ddG_ion_uncertainty_kcal_mol"] = _round(u)
        out["ddG_ion_uncertainty_basis"] = (
            "the same cation as the reference: no difference error" if u == 0.0 else
            _difference_basis(cal, group, _group_of({"cation_smiles": ref}), "raw")
            if ref not in (None, ANCHOR_SMILES) else
            "against the tert-butyl cation, the exact anchor of the reference residuals: the RMS "
            "residual of this cation's group (each residual is already a difference from tert-butyl)")
    if r.get("ddG_ion_vs_tert_butyl_kcal_mol") is not None:
        is_anchor = cation == ANCHOR_SMILES
        out["ddG_ion_vs_tert_butyl_uncertainty_kcal_mol"] = _round(0.0 if is_anchor else
                                                                   _absolute(cal, group, "raw"))
        out["ddG_ion_vs_tert_butyl_uncertainty_basis"] = (
            "the tert-butyl cation itself" if is_anchor else
            "RMS residual of this cation's class group against the tert-butyl anchor (each residual is a "
            f"difference from tert-butyl; calibration_residuals.csv, {cal.id})")
    return out


def _vs_best_bars(r: Mapping, q: str, bars: _Bars, group: str | None, cation: str | None,
                  did_calibrate: bool) -> dict:
    """Error bar of the gap to the input's best site (``q`` = hia or dG_ion); calibrated HIA gap on request."""
    key = f"{q}_vs_best_kcal_mol"
    cal = bars.cal
    out = {}
    b_group, b_cation = bars.best.get(r.get("input", ""), (None, None))
    if bars.calibrated and q == "hia" and did_calibrate:
        gap = cal.a * float(r[key]) + cal.class_offset(group) - cal.class_offset(b_group)
        out.update({f"{q}_vs_best_raw_kcal_mol": r[key], key: round(gap, 2)})
    how = bars.kind if q == "hia" else "raw"
    if b_cation is not None and b_cation == cation:
        u, basis = 0.0, "the same cation as the best site: no difference error"
    elif b_cation == ANCHOR_SMILES:
        u = _absolute(cal, group, how)
        basis = "against tert-butyl, the exact anchor: the RMS error of this cation's group"
    elif cation == ANCHOR_SMILES:
        u = _absolute(cal, b_group, how)
        basis = "against tert-butyl, the exact anchor: the RMS error of the best site's group"
    else:
        u = _relative(cal, group, b_group, how)
        basis = _difference_basis(cal, group, b_group, how)
    out.update({f"{q}_vs_best_uncertainty_kcal_mol": _round(u), f"{q}_vs_best_uncertainty_basis": basis})
    return out


def _basis(bars: _Bars, group: str | None, did_calibrate: bool, is_anchor: bool) -> dict:
    """Where the bars come from, and whether (and why not) the values are calibrated."""
    cal = bars.cal
    which = "leave-one-out RMS error of the calibration" if (bars.calibrated and did_calibrate) else \
        "RMS error of the raw values (bias included)"
    own = group is not None and cal.error_model(group, "raw")[3]
    scope = (f"class group {group} (n {cal.error_model(group, 'raw')[2]})" if own else
             f"whole set (n {cal.n}; class group {group or 'unknown'} has fewer than 3 reference cations)")
    out = {"uncertainty_basis": (f"{which} against the gas-phase HIA set, {scope}, {cal.id}; ΔG_ion/ΔG_het: "
                                 "the cation's HIA error (leaving-group and solvation errors not included); "
                                 "differences: error of the difference" + bars.basis_note),
           "calibrated": did_calibrate}
    if did_calibrate:
        out["calibration_id"] = cal.id
        out["calibration"] = cal.describe(group)
    elif bars.calibrated:
        if not bars.can_calibrate:
            out["calibration_note"] = (f"no calibration is stored for {bars.level} (only gas-phase HIA "
                                       "experiment exists to fit one): values are raw")
        elif is_anchor:
            out["calibration_note"] = "the anchor's HIA is the experimental value; nothing to calibrate"
        else:
            out["calibration_note"] = "the calibration corrects HIA only; this record's values are raw"
    return out


__all__ = ["annotate", "format_value", "pair_difference_rms"]
