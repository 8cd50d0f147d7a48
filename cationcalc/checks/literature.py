"""Checks against published experiment: reference sets, statistics, trends, plots.

``cationcalc check`` recomputes the bundled reference sets with the current
settings and says how far the numbers can be trusted:

* **gas-phase HIA** (absolute set, kcal/mol; ``data/gas_hydride_ion_affinities.csv``):
  n, MAE, RMSE, max error and mean signed error of the raw values, and the
  same after a linear calibration judged by leave-one-out (LOO), per-class
  residuals (alkyl, allylic/benzylic, aromatic, heteroatom-stabilized);
* **σ⁺ series** (correlation sets, gas phase): HIA of para-substituted benzyl
  and cumyl cations against Brown–Okamoto σ⁺ (``data/sigma_plus.csv``),
  slope in kcal/mol per σ⁺ unit, ρ⁺ = −slope/(2.303RT), r and Spearman ρ;
* **Mayr E** (correlation set, dichloromethane): HIA of the benzhydrylium
  ions in ALPB(dichloromethane) against their electrophilicity E
  (``data/mayr_electrophilicity.csv``);
* **pKR⁺** (correlation set, water): ΔG of R⁺ + OH⁻ → ROH in ALPB(water)
  against pKR⁺ (``data/pkr_plus.csv``).  pKR⁺ = ΔG(R⁺ + H₂O → ROH + H⁺)/(2.303RT);
  the hydroxide form differs from it by the constant ΔG of water
  autoionisation, so the slope, r and ρ are those of the defined quantity
  while the implicit-solvent proton (whose solvation ALPB cannot describe) is
  avoided.  Ideal slope: 2.303RT = 1.36 kcal/mol per pK unit;
* **trend checks**: orders a chemist reads at a glance, each pass/fail with
  its numbers and the source of the experimental order.

For every correlation set the worst five entries are those furthest from the
least-squares line experiment = m·computed + c, in the experiment's units.
A plot (PNG) per set is written to the output folder.  Species are kept in a
result store (``<output>/store.sqlite``) so a re-run is instant.

Which rows enter which set, and why, is in :func:`reference_sets` (each
excluded row is listed in the report with its reason).

Example
-------
>>> from cationcalc.checks.literature import reference_sets
>>> sets = reference_sets()
>>> sets["gas_hia"].kind, len(sets["gas_hia"].entries) >= 10
('absolute', True)
>>> [e.name for e in sets["gas_hia"].excluded][:2]
['1-propyl (threshold ion)', 'isobutyl (threshold ion)']
>>> sets["sigma_benzyl"].expected_sign
1
"""

from __future__ import annotations

import json
import math
import tempfile
import time
from dataclasses import asdict, dataclass
from pathlib import Path

import numpy as np
from rdkit import Chem
from scipy.stats import spearmanr

from cationcalc.about import __version__
from cationcalc.chem import units
from cationcalc.trust.calibration import (CLASS_GROUPS, cation_group, calibration_for, error_statistics, fit_calibration, fit_linear,
                          loo_predictions)
from cationcalc.compute.models import Settings
from cationcalc.chem.reference import load_table
from cationcalc.chem.species import Species, carbocation

ANCHOR_SMILES = "C[C+](C)C"
KEISTER_1993 = "Keister, J. W.; Riley, J. S.; Baer, T. J. Am. Chem. Soc. 1993, 115, 12613"
HOULE_1979 = "Houle, F. A.; Beauchamp, J. L. J. Am. Chem. Soc. 1979, 101, 4067"
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
    construction; its 1979 value is superseded) and the threshold-ion rows
    (1-propyl, isobutyl, neopentyl: those cations are not minima).  Kept: the
    0 K photoionization onsets of benzyl and tropylium (they differ from 298 K
    values by 1–2 kcal/mol, far below the method error) and the rows whose
    heats of formation were recalled (formyl, cyclopropenylium, methoxymethyl;
    ±3–5 kcal/mol), with their status shown.  A cation that relaxes to another
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
        elif Chem.CanonSmiles(row["cation_smiles"]) == Chem.CanonSmiles(ANCHOR_SMILES):
            reason = "superseded 1979 value" if "superseded" in notes else "anchor of the hydride exchange (exact by construction)"
            excluded.append(Entry(**{**asdict(entry), "note": reason}))
        else:
            entries.append(entry)
    return ReferenceSet(
        "gas_hia", "gas-phase hydride-ion affinity", "absolute", "run", "HIA_exp / kcal/mol", "HIA_calc / kcal/mol", 1,
        tuple(entries), ("methyl", "ethyl", "2-propyl", "allyl", "acetyl (ATcT-based acetaldehyde)",
                         "trifluoromethyl", "formyl HCO+", "cyclopropenylium", "methoxymethyl CH3OCH2+",
                         "benzyl (0 K, onset)", "tropylium (0 K, onset)"),
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


def _sigma_sets() -> tuple[ReferenceSet, ReferenceSet]:
    rows = load_table("sigma_plus")
    benzyl = tuple(Entry(f"{r['substituent']}-benzyl", r["benzyl_cation_smiles"], float(r["sigma_plus"]), r["source"],
                         r["status"]) for r in rows)
    cumyl = tuple(Entry(f"{r['substituent']}-cumyl", cumyl_smiles(r["benzyl_cation_smiles"]), float(r["sigma_plus"]),
                        r["source"], r["status"], "σ⁺ was defined by the solvolysis of these cumyl chlorides")
                  for r in rows)
    note = ("slope in kcal/mol per σ⁺ unit; ρ⁺ = −slope/(2.303RT) on the log K scale of R–H + R0⁺ ⇌ R⁺ + R0–H "
            "(negative: donors stabilise the cation)")
    s1 = ReferenceSet("sigma_benzyl", "σ⁺ vs gas HIA, para-substituted benzyl cations", "correlation", "run",
                      "σ⁺ (Brown–Okamoto)", "HIA_calc / kcal/mol", 1, benzyl,
                      tuple(e.name for e in benzyl), note=note)
    s2 = ReferenceSet("sigma_cumyl", "σ⁺ vs gas HIA, para-substituted cumyl cations", "correlation", "run",
                      "σ⁺ (Brown–Okamoto)", "HIA_calc / kcal/mol", 1, cumyl,
                      (), note=note)
    return s1, s2


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
    gas = _gas_hia_set()
    benzyl, cumyl = _sigma_sets()
    return {s.key: s for s in (gas, benzyl, cumyl, _mayr_set(), _pkr_set())}


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


# ------------------------------------------------------------------ statistics

def absolute_statistics(calc, exp) -> dict:
    """Errors calc − exp: n, MAE, RMSE, max, mean (kcal/mol)."""
    return error_statistics(np.asarray(calc, float) - np.asarray(exp, float))


def correlation_statistics(exp, calc) -> dict:
    """Computed against experiment: slope d(calc)/d(exp), intercept, Pearson r, Spearman ρ."""
    exp = np.asarray(exp, float)
    calc = np.asarray(calc, float)
    if exp.size < 3:
        return {"n": int(exp.size), "slope": None, "intercept": None, "r": None, "spearman_rho": None}
    fit = fit_linear(exp, calc)
    return {"n": int(exp.size), "slope": fit.a, "intercept": fit.b, "r": fit.r,
            "spearman_rho": float(spearmanr(exp, calc).statistic)}


def _ln10_rt(temperature_k: float) -> float:
    return math.log(10.0) * units.rt_kcal_mol(temperature_k)


# ------------------------------------------------------------------ computing

def _settings_for(base: Settings, medium: str) -> Settings:
    if medium == "run":
        return base
    return Settings(**{**base.model_dump(), "solvent": medium})


def _hia_values(items: dict[str, str], settings: Settings, workers: int, store, progress) -> dict[str, dict]:
    """Canonical cation SMILES → hia record, computing each cation once."""
    from cationcalc.tasks.runner import run_task

    unique = {}
    for name, smi in items.items():
        unique.setdefault(carbocation(smi).smiles, name)
    records = run_task("hia", [(smi, name) for smi, name in unique.items()], settings, workers=workers,
                       store=store, progress=progress)
    return {r["cation_smiles"]: r for r in records if r.get("cation_smiles")}


def _species_results(species: list[Species], settings: Settings, workers: int, store, progress) -> dict:
    from cationcalc.execution.executors import compute_many

    return compute_many(species, settings, workers=workers, store=store, progress=progress)


def _entry_row(entry: Entry, calc: float | None, record: dict | None, error: str | None = None) -> dict:
    row = {"name": entry.name, "smiles": entry.smiles, "exp": entry.value, "calc": calc, "source": entry.source,
           "status": entry.status, "note": entry.note}
    if record is not None:
        row["rearranged"] = bool(record.get("rearranged"))
        row["relaxed_smiles"] = record.get("relaxed_cation_smiles")
    if error:
        row["error"] = error
    return row


def _evaluate_absolute(rs: ReferenceSet, entries, hia: dict[str, dict], settings: Settings) -> dict:
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
                                     "applied": absolute_statistics([stored.apply(c) for c in calc], exp)}
    out["worst"] = sorted(used, key=lambda r: -abs(r["residual"]))[:5]
    return out


def _evaluate_correlation(rs: ReferenceSet, entries, values: dict[str, tuple[float | None, dict | None, str | None]],
                          settings: Settings, calibration=None) -> dict:
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
            out["rho_plus"] = -stats["slope"] / _ln10_rt(settings.temperature_k)
        if rs.key == "pkr":
            out["ideal_slope"] = _ln10_rt(settings.temperature_k)
        if calibration is not None:
            out["calibrated_slope"] = calibration.a * stats["slope"]
            out["calibration_id"] = calibration.id
    else:
        out["worst"] = []
        out["sign_ok"] = None
    return out


def _pkr_values(rs: ReferenceSet, entries, settings: Settings, workers, store, progress) -> dict:
    need = {}
    for e in entries:
        cat = carbocation(e.smiles)
        need[e.name] = (Species(cat.smiles, 1, 1), Species(alcohol_smiles(e.smiles), 0, 1))
    hydroxide = Species("[OH-]", -1, 1)
    species = [sp for pair in need.values() for sp in pair] + [hydroxide]
    results = _species_results(species, settings, workers, store, progress)
    k = units.HARTREE_TO_KCAL_MOL
    values = {}
    for name, (cat, alc) in need.items():
        res = [results[cat], results[alc], results[hydroxide]]
        failed = [r.message for r in res if not hasattr(r, "G_hartree")]
        if failed:
            values[name] = (None, None, "; ".join(failed))
            continue
        dg = (res[1].G_hartree - res[0].G_hartree - res[2].G_hartree) * k
        values[name] = (float(dg), {"rearranged": res[0].rearranged, "relaxed_cation_smiles": res[0].relaxed_smiles},
                        None)
    return values


# ------------------------------------------------------------------ trends

def _trend(name: str, expectation: str, computed: str, experiment: str, source: str, passed: bool | None,
           note: str = "", status: str = "read") -> dict:
    """One row of the trend table; ``status`` says how the experimental value was obtained (read/derived/recalled)."""
    return {"check": name, "expectation": expectation, "computed": computed, "experiment": experiment,
            "source": source, "status": status, "passed": passed, "note": note}


def _hia_of(hia: dict[str, dict], smiles: str) -> float | None:
    rec = hia.get(carbocation(smiles).smiles)
    if rec is None or rec.get("error"):
        return None
    return rec["hia_kcal_mol"]


def _order(values: list[float | None]) -> bool | None:
    if any(v is None for v in values):
        return None
    return all(a > b for a, b in zip(values, values[1:]))


def _fmt(v: float | None, digits: int = 1) -> str:
    return "n/a" if v is None else f"{v:.{digits}f}"


def trend_checks(hia: dict[str, dict], isomer_h: dict[str, dict[str, float | None]], correlations: dict[str, dict],
                 gas_table: dict[str, float]) -> list[dict]:
    """The trend table: each check pass/fail with the computed numbers and the experimental order's source.

    ``hia``: canonical cation SMILES → hia record; ``isomer_h``: formula →
    name → enthalpy relative to the aromatic ion (kcal/mol); ``correlations``:
    evaluated σ⁺ sets; ``gas_table``: experimental HIA by table name.
    """
    h = {name: _hia_of(hia, smi) for name, smi in TREND_CATIONS.items()}
    out = []
    series = [h["methyl"], h["ethyl"], h["2-propyl"], h["tert-butyl"]]
    out.append(_trend(
        "hyperconjugation", "HIA methyl > ethyl > 2-propyl > tert-butyl",
        " > ".join(_fmt(v) for v in series),
        f"{gas_table['methyl']} > {gas_table['ethyl']} > {gas_table['2-propyl']} > 236.7",
        f"{HOULE_1979}; {KEISTER_1993}", _order(series)))
    for name, partner in (("1-phenylethyl", "2-propyl"), ("1-methylallyl", "2-propyl"), ("cumyl", "tert-butyl")):
        a, b = h[name], h[partner]
        out.append(_trend(
            f"resonance: {name} vs {partner}", f"HIA {name} < {partner} (same substitution, π-conjugated)",
            f"{_fmt(a)} vs {_fmt(b)} (Δ {_fmt(None if a is None or b is None else a - b)})",
            "order only", "common practice, no source", None if a is None or b is None else a < b))
    a, b = h["benzyl"], h["tert-butyl"]
    out.append(_trend(
        "benzyl (primary) vs tert-butyl", "HIA benzyl > tert-butyl (published gas-phase values)",
        f"{_fmt(a)} vs {_fmt(b)}", f"{gas_table['benzyl (0 K, onset)']} (0 K) vs 236.7", f"{TORMA_2019}; {KEISTER_1993}",
        None if a is None or b is None else a > b,
        "textbooks rank benzylic with tertiary; the gas-phase measurements put the primary benzyl cation "
        "about 4 kcal/mol less stable than tert-butyl, and the check follows the measurements"))
    a, b = h["benzyl"], h["2-propyl"]
    exp_gap = gas_table["2-propyl"] - gas_table["benzyl (0 K, onset)"]
    out.append(_trend(
        "benzyl vs 2-propyl", "HIA benzyl < 2-propyl",
        f"{_fmt(a)} vs {_fmt(b)} (gap {_fmt(None if a is None or b is None else b - a)})",
        f"{gas_table['benzyl (0 K, onset)']} vs {gas_table['2-propyl']} (gap {exp_gap:.1f})",
        f"{TORMA_2019}; {HOULE_1979}", None if a is None or b is None else a < b,
        "GFN2-xTB compresses this gap (benzyl is overestimated more than 2-propyl)"))
    for formula, group in ISOMERS.items():
        names = list(group)
        rel = isomer_h.get(formula, {})
        others = [rel.get(n) for n in names[1:]]
        passed = None if any(v is None for v in others) else all(v > 0 for v in others)
        if formula == "C7H7+":
            # ΔfH(benzyl+) − ΔfH(tropylium+) from the two 0 K onsets (HIA0) and ΔfH of toluene (12.0) and
            # cycloheptatriene (43.9 kcal/mol), values from memory of the NIST/Pedley compilations
            exp_gap = (gas_table["benzyl (0 K, onset)"] - gas_table["tropylium (0 K, onset)"]) + (12.0 - 43.9)
            exp_text = f"benzyl +{exp_gap:.1f}"
            src, status = TORMA_2019, "derived"
        else:
            exp_text = "propargyl ≈ +25"
            src, status = LIAS_1988, "recalled"
        out.append(_trend(
            f"aromatic stabilization {formula}", f"{names[0]} lowest in enthalpy among {', '.join(names)}",
            ", ".join(f"{n} {_fmt(rel.get(n)) if n != names[0] else '0'}" for n in names) + " kcal/mol",
            exp_text, src, passed, status=status))
    for name in ("vinyl", "phenyl"):
        a, b = h[name], h["2-propyl"]
        out.append(_trend(
            f"σ cation: {name} vs 2-propyl", f"HIA {name} > 2-propyl",
            f"{_fmt(a)} vs {_fmt(b)}", {"vinyl": "≈289", "phenyl": "≈287"}[name] + f" vs {gas_table['2-propyl']}",
            f"{LIAS_1988}; 2-propyl: {HOULE_1979}",
            None if a is None or b is None else a > b, status="recalled"))
    a, b = h["2-propenyl"], h["allyl"]
    out.append(_trend(
        "2-propenyl (vinylic) vs allyl", "HIA 2-propenyl > allyl",
        f"{_fmt(a)} vs {_fmt(b)} (Δ {_fmt(None if a is None or b is None else a - b)})",
        f"≈261 vs {gas_table['allyl']}", f"2-propenyl: {LIAS_1988}; allyl: J. Phys. Chem. A 2009, 113, 10710",
        None if a is None or b is None else a > b,
        "a known failure of GFN2-xTB, which overstabilizes vinyl cations", status="recalled (2-propenyl)"))
    for key, label in (("sigma_benzyl", "benzyl"), ("sigma_cumyl", "cumyl")):
        c = correlations.get(key)
        if c is None:
            continue
        ok = None if c.get("r") is None else bool(c["sign_ok"] and c["r"] >= 0.95)
        out.append(_trend(
            f"σ⁺ series: para-{label}", "HIA rises with σ⁺ (slope > 0, ρ⁺ < 0), r ≥ 0.95",
            (f"n {c['n']}, slope {_fmt(c['slope'])} kcal/mol/σ⁺, ρ⁺ {_fmt(c.get('rho_plus'))}, r {_fmt(c['r'], 3)}"
             if c.get("r") is not None else "n/a"),
            "σ⁺ constants", BROWN_OKAMOTO, ok))
    return out


# ------------------------------------------------------------------ driver

def run_checks(settings: Settings | None = None, *, quick: bool = False, workers: int = 1, store=None,
               sets: list[str] | None = None, progress=None) -> dict:
    """Recompute the reference sets and trends; returns the report as a dict (see :func:`format_report`)."""
    from cationcalc.execution.store import ResultStore

    settings = settings or Settings()
    start = time.perf_counter()
    own_store = None
    if store is None:
        own_store = tempfile.TemporaryDirectory(prefix="cationcalc-check-")
        store = ResultStore(Path(own_store.name) / "store.sqlite")
    all_sets = reference_sets()
    with_rates = sets is None or "rates" in sets
    chosen = [all_sets[k] for k in (sets or all_sets) if k != "rates"]

    def entries_of(rs: ReferenceSet):
        return tuple(e for e in rs.entries if e.name in rs.quick) if quick else rs.entries

    skipped = [rs.key for rs in chosen if not entries_of(rs)]
    chosen = [rs for rs in chosen if entries_of(rs)]

    try:
        # 1. every HIA of the run's medium at once (sets, σ⁺ series, trends)
        items = {}
        for rs in chosen:
            if rs.medium == "run":
                items.update({f"{rs.key}:{e.name}": e.smiles for e in entries_of(rs)})
        items.update({f"trend:{k}": v for k, v in TREND_CATIONS.items()})
        hia = _hia_values(items, settings, workers, store, progress)
        # 2. isomer enthalpies (cations already in the store)
        iso_species = {smi: Species(carbocation(smi).smiles, 1, 1) for group in ISOMERS.values() for smi in group.values()}
        iso_results = _species_results(list(iso_species.values()), settings, workers, store, progress)
        isomer_h = {}
        for formula, group in ISOMERS.items():
            names = list(group)
            ref = iso_results[iso_species[group[names[0]]]]
            isomer_h[formula] = {}
            for n in names:
                r = iso_results[iso_species[group[n]]]
                ok = hasattr(r, "H_hartree") and hasattr(ref, "H_hartree")
                isomer_h[formula][n] = (r.H_hartree - ref.H_hartree) * units.HARTREE_TO_KCAL_MOL if ok else None
        gas_table = {row["name"]: float(row["hia_kcal_mol"]) for row in load_table("gas_hydride_ion_affinities")}
        results = {}
        for rs in chosen:
            s = _settings_for(settings, rs.medium)
            entries = entries_of(rs)
            if rs.kind == "absolute":
                results[rs.key] = _evaluate_absolute(rs, entries, hia, s)
                continue
            if rs.key == "pkr":
                values = _pkr_values(rs, entries, s, workers, store, progress) if entries else {}
            else:
                table = hia if rs.medium == "run" else (_hia_values({e.name: e.smiles for e in entries}, s, workers,
                                                                    store, progress) if entries else {})
                values = {}
                for e in entries:
                    rec = table.get(carbocation(e.smiles).smiles)
                    if rec is None or rec.get("error"):
                        values[e.name] = (None, rec, (rec or {}).get("error", "not computed"))
                    else:
                        values[e.name] = (rec["hia_kcal_mol"], rec, None)
            cal = calibration_for(s) if rs.medium == "run" else None
            results[rs.key] = _evaluate_correlation(rs, entries, values, s, cal)
        trends = trend_checks(hia, isomer_h, results, gas_table)
        kinetics = None
        if with_rates:
            from cationcalc.checks.rates import run_rate_checks

            kinetics = run_rate_checks(settings, quick=quick, workers=workers, store=store, progress=progress)
    finally:
        if own_store is not None:
            store.close()
            own_store.cleanup()
    return {"version": __version__, "level": settings.level, "engine": settings.engine,
            "solvent": settings.solvent or "none", "quick": quick, "workers": workers,
            "elapsed_s": round(time.perf_counter() - start, 1), "sets": results, "trends": trends,
            "skipped": skipped, "kinetics": kinetics}


def calibration_from_report(report: dict, settings: Settings, *, fit_date: str | None = None):
    """The calibration (HIA_exp ≈ a·HIA_calc + b) fitted to the gas-HIA set of a full check report."""
    gas = report["sets"]["gas_hia"]
    rows = [{"name": r["name"], "cation_smiles": carbocation(r["smiles"]).smiles, "cation_class": r["cation_class"],
             "class_group": r["class_group"], "hia_exp_kcal_mol": r["exp"], "hia_calc_kcal_mol": r["calc"],
             "status": r["status"], "source": r["source"]}
            for r in gas["entries"] if r.get("calc") is not None and not r.get("excluded_reason")]
    dataset = ("cationcalc/data/gas_hydride_ion_affinities.csv minus the anchor (tert-butyl), the superseded value "
               "and the threshold ions")
    return fit_calibration(rows, method=settings.method, engine=settings.engine, solvent_model=settings.solvent_model,
                           solvent=settings.solvent, level=settings.level, dataset=dataset, fit_date=fit_date,
                           notes="HIA by isodesmic hydride exchange against tert-butyl; LOO = leave-one-out")


# ------------------------------------------------------------------ output

def _short_source(source: str) -> str:
    """The citation without the verification remarks, e.g. 'Houle, F. A.; ... 1979, 101(15), 4067'."""
    import re

    text = source.split(" (")[0].split("; also tabulated")[0].strip().rstrip(",;")
    if not re.search(r"\d{4}", text):  # the citation itself is inside the brackets: keep everything
        text = source
    parts = text.split("; ")
    if len(text) > 110 and len(parts) > 3:  # long author list: first author et al. and the journal
        m = re.search(r"\b(?:J\.|Chem\.|Angew\.|Org\.|Eur\.|Phys\.) .*", parts[-1])
        if m:
            text = f"{parts[0]} et al. {m.group(0)}"
    return text if len(text) <= 110 else text[:107] + "..."


def format_report(report: dict) -> str:
    """The check report as Markdown-friendly text: per set, then the trend table, then the sources."""
    lines = [f"# cationcalc check — {report['level']} (cationcalc {report['version']}"
             f"{', quick subset' if report['quick'] else ''})", ""]
    sources: dict[str, set] = {}
    for key, s in report["sets"].items():
        lines.append(f"## {s['title']} [{key}] — {s['level']}")
        for e in s["entries"]:
            sources.setdefault(e["source"], set()).add(key)
        if s["kind"] == "absolute":
            raw = s["raw"]
            lines.append(f"n = {raw['n']} (anchor tert-butyl excluded); errors = computed − experiment, kcal/mol")
            if raw["n"]:
                lines.append(f"raw:                 MAE {raw['mae']:.1f}  RMSE {raw['rmse']:.1f}  max {raw['max']:.1f}  "
                             f"mean {raw['mean']:+.1f}")
            if s.get("loo"):
                loo, fit = s["loo"], s["fit"]
                lines.append(f"calibrated (LOO):    MAE {loo['mae']:.1f}  RMSE {loo['rmse']:.1f}  max {loo['max']:.1f}  "
                             f"mean {loo['mean']:+.1f}   [HIA_exp ≈ {fit['a']:.3f}·HIA_calc {fit['b']:+.1f}]")
            if s.get("stored_calibration"):
                st = s["stored_calibration"]
                lines.append(f"stored calibration {st['id']} (a {st['a']:.3f}, b {st['b']:+.1f}, n {st['n']}) applied: "
                             f"MAE {st['applied']['mae']:.1f}  RMSE {st['applied']['rmse']:.1f} (in-sample when the "
                             f"data are the fit data; LOO RMSE {st['loo_rmse']:.1f})")
            if s.get("groups"):
                lines.append("per class group (raw mean / raw RMS / LOO RMS, kcal/mol):")
                for g, st in s["groups"].items():
                    lines.append(f"  {g:<22} n {st['n']}  {st['raw']['mean']:+6.1f} / {st['raw']['rmse']:5.1f} / "
                                 f"{st['loo']['rmse']:5.1f}   ({', '.join(st['names'])})")
            lines.append("worst five (raw residual):")
            for w in s["worst"]:
                lines.append(f"  {w['name']:<34} calc {w['calc']:7.1f}  exp {w['exp']:6.1f}  {w['residual']:+6.1f}"
                             f"  [{_short_source(w['source'])}; {w['status']}]")
        else:
            if s.get("r") is None:
                lines.append(f"n = {s['n']}: too few points for a correlation")
            else:
                extra = ""
                if s.get("rho_plus") is not None:
                    extra = f"  ρ⁺ {s['rho_plus']:+.1f}"
                if s.get("ideal_slope") is not None:
                    extra = f"  (ideal slope {s['ideal_slope']:.2f})"
                lines.append(f"n = {s['n']}: slope {s['slope']:+.2f} kcal/mol per unit, intercept {s['intercept']:+.1f}, "
                             f"r {s['r']:+.3f}, Spearman ρ {s['spearman_rho']:+.3f}{extra}; expected sign "
                             f"{'+' if s['expected_sign'] > 0 else '−'}: {'ok' if s['sign_ok'] else 'WRONG'}")
                if s.get("calibrated_slope") is not None:
                    lines.append(f"after calibration ({s['calibration_id']}): slope {s['calibrated_slope']:+.2f}"
                                 + (f", ρ⁺ {s['rho_plus'] * s['calibrated_slope'] / s['slope']:+.1f}"
                                    if s.get("rho_plus") is not None else "") + "; r and ρ unchanged (linear map)")
                lines.append(f"worst five (experiment − line from computed, in units of {s['experiment']}):")
                for w in s["worst"]:
                    lines.append(f"  {w['name']:<34} calc {w['calc']:8.2f}  exp {w['exp']:+7.2f}  {w['residual']:+6.2f}"
                                 f"  [{_short_source(w['source'])}; {w['status']}]")
        failed = [e for e in s["entries"] if e.get("error")]
        for e in failed:
            lines.append(f"  not computed: {e['name']}: {e['error']}")
        for e in s["entries"]:
            if e.get("excluded_reason"):
                lines.append(f"  left out at run time: {e['name']}: {e['excluded_reason']}")
        for e in s.get("excluded", []):
            lines.append(f"  not in the set: {e['name']}: {e['reason']}")
        if s.get("note"):
            lines.append(f"note: {s['note']}")
        if s.get("plot"):
            lines.append(f"plot: {s['plot']}")
        lines.append("")
    if report.get("skipped"):
        lines.append(f"not in this run (--quick keeps the cheap sets): {', '.join(report['skipped'])}")
        lines.append("")
    lines.append("## trend checks")
    lines.append(f"| check | expectation | computed (kcal/mol) | experiment | verdict |")
    lines.append("|---|---|---|---|---|")
    for t in report["trends"]:
        verdict = "n/a" if t["passed"] is None else ("PASS" if t["passed"] else "FAIL")
        lines.append(f"| {t['check']} | {t['expectation']} | {t['computed']} | {t['experiment']} | {verdict} |")
    lines.append("")
    a = report["sets"].get("gas_hia", {}).get("fit", {}).get("a")
    if a is not None and a > 0:
        lines.append(f"After calibration (HIA_exp ≈ a·HIA_calc + b, a = {a:.3f} > 0) every HIA order above is kept, so "
                     "each HIA verdict is the same; computed gaps scale by a (isomer enthalpies are not calibrated).")
    for t in report["trends"]:
        lines.append(f"- {t['check']}: source {t['source']}; status {t.get('status', 'read')}"
                     + (f"; {t['note']}" if t["note"] else ""))
    lines.append("")
    if report.get("kinetics"):
        from cationcalc.checks.rates import format_rate_checks

        lines.extend(format_rate_checks(report["kinetics"]))
        if report["kinetics"].get("plot"):
            lines.append(f"plot: {report['kinetics']['plot']}")
        lines.append("")
    lines.append("## experimental sources")
    for src, keys in sources.items():
        lines.append(f"- [{', '.join(sorted(keys))}] {src}")
    lines.append("")
    lines.append(f"elapsed {report['elapsed_s']} s with {report['workers']} worker(s)")
    return "\n".join(lines)


def plot_set(result: dict, path: str | Path) -> Path:
    """Parity plot (absolute set: raw and LOO-calibrated) or correlation plot (experiment vs computed), PNG."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    used = [e for e in result["entries"] if e.get("calc") is not None and not e.get("excluded_reason")]
    fig, ax = plt.subplots(figsize=(6.4, 5.2), dpi=110)
    if result["kind"] == "absolute":
        exp = np.array([e["exp"] for e in used])
        calc = np.array([e["calc"] for e in used])
        ax.scatter(exp, calc, label=f"raw (MAE {result['raw']['mae']:.1f})", color="tab:red")
        if result.get("loo"):
            cal = np.array([e["loo_calibrated"] for e in used])
            ax.scatter(exp, cal, marker="s", label=f"calibrated, LOO (MAE {result['loo']['mae']:.1f})",
                       color="tab:blue")
        lo, hi = min(exp.min(), calc.min()) - 5, max(exp.max(), calc.max()) + 5
        ax.plot([lo, hi], [lo, hi], color="grey", lw=1, label="y = x")
        ax.set_xlabel("HIA experiment / kcal mol⁻¹")
        ax.set_ylabel("HIA computed / kcal mol⁻¹")
        for e in used:
            ax.annotate(e["name"].split(" (")[0], (e["exp"], e["calc"]), fontsize=6, xytext=(3, 2),
                        textcoords="offset points")
    else:
        exp = np.array([e["exp"] for e in used])
        calc = np.array([e["calc"] for e in used])
        ax.scatter(exp, calc, color="tab:blue")
        if result.get("slope") is not None:
            xs = np.linspace(exp.min(), exp.max(), 10)
            ax.plot(xs, result["slope"] * xs + result["intercept"], color="grey", lw=1,
                    label=f"slope {result['slope']:.2f}, r {result['r']:.3f}, ρ {result['spearman_rho']:.2f}")
            ax.legend(fontsize=8)
        for e in used:
            ax.annotate(e["name"], (e["exp"], e["calc"]), fontsize=6, xytext=(3, 2), textcoords="offset points")
        ax.set_xlabel(result["experiment"])
        ax.set_ylabel(result["computed"])
    if result["kind"] == "absolute":
        ax.legend(fontsize=8)
    ax.set_title(f"{result['title']}\n{result['level']}", fontsize=9)
    fig.tight_layout()
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path)
    plt.close(fig)
    return path


def write_outputs(report: dict, folder: str | Path, plots: bool = True) -> list[Path]:
    """check_report.md, check_report.json and one PNG per set into ``folder``."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    if plots:
        for key, s in report["sets"].items():
            if any(e.get("calc") is not None for e in s["entries"]):
                path = plot_set(s, folder / f"check_{key}.png")
                s["plot"] = path.name  # relative to the report folder
                written.append(path)
    if plots and report.get("kinetics"):
        from cationcalc.checks.rates import plot_rates

        path = plot_rates(report["kinetics"], folder / "check_rates.png")
        report["kinetics"]["plot"] = path.name
        written.append(path)
    md = folder / "check_report.md"
    md.write_text(format_report(report) + "\n", encoding="utf-8")
    js = folder / "check_report.json"
    js.write_text(json.dumps(report, indent=1, ensure_ascii=False, default=float) + "\n", encoding="utf-8")
    return written + [md, js]


__all__ = ["Entry", "ReferenceSet", "reference_sets", "cumyl_smiles", "alcohol_smiles", "absolute_statistics",
           "correlation_statistics", "trend_checks", "run_checks", "calibration_from_report", "format_report",
           "plot_set", "write_outputs", "TREND_CATIONS", "ISOMERS"]
