"""Checks against published experiment: ``cationcalc check`` recomputes the bundled reference sets.

It recomputes the sets of :mod:`cationcalc.checks.reference_sets` with the
current settings and says how far the numbers can be trusted: the
statistics of each set (:mod:`cationcalc.checks.statistics`), the trend
checks (:mod:`cationcalc.checks.trends`), the rate set
(:mod:`cationcalc.checks.rates`); then the text report
(:mod:`cationcalc.checks.text_report`), ``check_report.json`` and a plot
(PNG) per set (:mod:`cationcalc.checks.plots`).  Species are kept in a
result store (``<output>/store.sqlite``) so a re-run is instant.

* **gas-phase HIA**: n, MAE, RMSE, max error and mean signed error of the raw
  values, and the same after a linear calibration judged by leave-one-out
  (LOO), per-class residuals;
* **σ⁺ series**: slope in kcal/mol per σ⁺ unit, ρ⁺ = −slope/(2.303RT), r and Spearman ρ; in ALPB(acetone),
  the protocol's stand-in for the 90 % aqueous acetone of the σ⁺ definition (best r of gas, acetone and
  water, see ``reference_sets.SIGMA_PLUS_MEDIUM``), and in the run's medium (gas by default);
* **Mayr E** (dichloromethane): HIA of the benzhydrylium ions against E;
* **pKR⁺** (water): ΔG of R⁺ + OH⁻ → ROH in ALPB(water) against pKR⁺.
  pKR⁺ = ΔG(R⁺ + H₂O → ROH + H⁺)/(2.303RT); the hydroxide form differs from
  it by the constant ΔG of water autoionisation, so the slope, r and ρ are
  those of the defined quantity while the implicit-solvent proton (whose
  solvation ALPB cannot describe) is avoided.  Ideal slope: 2.303RT = 1.36
  kcal/mol per pK unit;
* **trend checks**: orders a chemist reads at a glance, each pass/fail with
  its numbers and the source of the experimental order.

Example
-------
>>> from cationcalc.checks.literature import reference_sets
>>> sorted(reference_sets())
['gas_hia', 'mayr_E', 'pkr', 'sigma_benzyl', 'sigma_benzyl_solution', 'sigma_cumyl', 'sigma_cumyl_solution']
"""

from __future__ import annotations

import json
import tempfile
import time
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

from cationcalc.about import __version__
from cationcalc.checks.plots import plot_set
from cationcalc.checks.reference_sets import ISOMERS, TREND_CATIONS, Entry, ReferenceSet, alcohol_smiles, reference_sets
from cationcalc.checks.statistics import evaluate_absolute, evaluate_correlation
from cationcalc.checks.text_report import format_report
from cationcalc.checks.trends import trend_checks
from cationcalc.chem import units
from cationcalc.chem.reference import load_table
from cationcalc.chem.species import Species, carbocation
from cationcalc.compute.models import Settings
from cationcalc.execution.executors import Progress
from cationcalc.execution.store import ResultStore
from cationcalc.trust.calibration import Calibration, calibration_for, fit_calibration

# ------------------------------------------------------------------ computing

def _settings_for(base: Settings, medium: str) -> Settings:
    if medium == "run":
        return base
    return Settings(**{**base.model_dump(), "solvent": medium})


def _hia_values(items: dict[str, str], settings: Settings, *, workers: int, store, progress) -> dict[str, dict]:
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


# ------------------------------------------------------------------ driver

def run_checks(settings: Settings | None = None, *, quick: bool = False, workers: int = 1,
               store: ResultStore | None = None,
               sets: list[str] | None = None, progress: Progress | None = None) -> dict:
    """Recompute the reference sets and trends; returns the report as a dict (see :func:`format_report`)."""
    settings = settings or Settings()
    start = time.perf_counter()
    chosen, skipped = _chosen_sets(sets, quick)
    with _check_store(store) as store:
        run = dict(workers=workers, store=store, progress=progress)
        # 1. every HIA of the run's medium at once (sets, σ⁺ series, trends)
        items = {f"{rs.key}:{e.name}": e.smiles for rs, entries in chosen for e in entries if rs.medium == "run"}
        items.update({f"trend:{k}": v for k, v in TREND_CATIONS.items()})
        hia = _hia_values(items, settings, **run)
        # 2. isomer enthalpies (cations already in the store)
        isomer_h = _isomer_enthalpies(settings, **run)
        gas_table = {row["name"]: float(row["hia_kcal_mol"]) for row in load_table("gas_hydride_ion_affinities")}
        # 3. each set in its own medium
        results = {rs.key: _evaluate_set(rs, entries, hia, settings, **run) for rs, entries in chosen}
        trends = trend_checks(hia, isomer_h, results, gas_table)
        kinetics = None
        if sets is None or "rates" in sets:
            from cationcalc.checks.rates import run_rate_checks

            kinetics = run_rate_checks(settings, quick=quick, **run)
    return {"version": __version__, "level": settings.level, "engine": settings.engine,
            "solvent": settings.solvent or "none", "quick": quick, "workers": workers,
            "elapsed_s": round(time.perf_counter() - start, 1), "sets": results, "trends": trends,
            "skipped": skipped, "kinetics": kinetics}


def _chosen_sets(sets: list[str] | None, quick: bool) -> tuple[list[tuple[ReferenceSet, tuple[Entry, ...]]],
                                                                 list[str]]:
    """(each set asked for with the entries this run computes, keys of the sets left with none)."""
    all_sets = reference_sets()
    chosen = [all_sets[k] for k in (sets or all_sets) if k != "rates"]
    with_entries = [(rs, tuple(e for e in rs.entries if e.name in rs.quick) if quick else rs.entries)
                    for rs in chosen]
    return [(rs, e) for rs, e in with_entries if e], [rs.key for rs, e in with_entries if not e]


@contextmanager
def _check_store(store) -> Iterator:
    """The store given, or a temporary one removed afterwards."""
    if store is not None:
        yield store
        return
    from cationcalc.execution.store import ResultStore

    own_store = tempfile.TemporaryDirectory(prefix="cationcalc-check-")
    store = ResultStore(Path(own_store.name) / "store.sqlite")
    try:
        yield store
    finally:
        store.close()
        own_store.cleanup()


def _isomer_enthalpies(settings: Settings, *, workers: int, store, progress) -> dict[str, dict[str, float | None]]:
    """Formula → isomer name → enthalpy relative to the aromatic ion (kcal/mol), None when not computed."""
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
    return isomer_h


def _evaluate_set(rs: ReferenceSet, entries: tuple[Entry, ...], hia: dict[str, dict], settings: Settings, *,
                  workers: int, store, progress) -> dict:
    """One set evaluated in its medium: HIA records of the run's medium, or computed here for a fixed one."""
    s = _settings_for(settings, rs.medium)
    if rs.kind == "absolute":
        return evaluate_absolute(rs, entries, hia, s)
    if rs.key == "pkr":
        values = _pkr_values(rs, entries, s, workers, store, progress) if entries else {}
    else:
        table = hia if rs.medium == "run" else (_hia_values({e.name: e.smiles for e in entries}, s, workers=workers,
                                                            store=store, progress=progress) if entries else {})
        values = {}
        for e in entries:
            rec = table.get(carbocation(e.smiles).smiles)
            if rec is None or rec.get("error"):
                values[e.name] = (None, rec, (rec or {}).get("error", "not computed"))
            else:
                values[e.name] = (rec["hia_kcal_mol"], rec, None)
    cal = calibration_for(s) if rs.medium == "run" else None
    return evaluate_correlation(rs, entries, values, s, cal)


def calibration_from_report(report: dict, settings: Settings, *, fit_date: str | None = None) -> Calibration:
    """The calibration (HIA_exp ≈ a·HIA_calc + b) fitted to the gas-HIA set of a full check report."""
    gas = report["sets"]["gas_hia"]
    verification = {row["name"]: row.get("verification", "") for row in load_table("gas_hydride_ion_affinities")}
    rows = [{"name": r["name"], "cation_smiles": carbocation(r["smiles"]).smiles, "cation_class": r["cation_class"],
             "class_group": r["class_group"], "hia_exp_kcal_mol": r["exp"], "hia_calc_kcal_mol": r["calc"],
             "status": r["status"], "source": r["source"], "verification": verification.get(r["name"], "")}
            for r in gas["entries"] if r.get("calc") is not None and not r.get("excluded_reason")]
    dataset = ("cationcalc/data/gas_hydride_ion_affinities.csv minus the anchor (tert-butyl), the superseded value "
               "and the threshold ions")
    return fit_calibration(rows, method=settings.method, engine=settings.engine, solvent_model=settings.solvent_model,
                           solvent=settings.solvent, level=settings.level, dataset=dataset, fit_date=fit_date,
                           notes="HIA by isodesmic hydride exchange against tert-butyl; LOO = leave-one-out")


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


__all__ = ["run_checks", "calibration_from_report", "write_outputs", "reference_sets", "format_report", "plot_set"]
