"""The kinetics part of ``cationcalc check``: predicted against published solvolysis rate constants.

Every row of ``data/solvolysis_rates.csv`` (25 °C, first-order k of R–X in a
named medium) is predicted with the ``rate`` task from the *computed* E_f
(leave-one-out for cations of the calibration set, so no published E_f enters
its own prediction) and compared in log units.  Rows whose substrate the model
places outside the SN1 picture (solvent-assisted hydrolyses) are not averaged:
the check is that they are flagged, and that the published k is not below the
SN1-only figure (which is a lower bound to the observed solvolysis).  The E_f
calibration itself is reported with its leave-one-out statistics.

Example
-------
>>> from cationcalc.checks.rates import rate_rows
>>> len(rate_rows()) >= 20
True
"""

from __future__ import annotations

import math
import os
from collections import defaultdict
from typing import TYPE_CHECKING, Callable

from cationcalc.trust.calibration import error_statistics
from cationcalc.trust.electrofuges import electrofugality_calibration, electrophilicity_calibration
from cationcalc.compute.models import Settings
from cationcalc.chem.reference import load_table

if TYPE_CHECKING:  # pragma: no cover
    from cationcalc.execution.store import ResultStore

#: rows of the quick subset (one calibrated substrate in three media, the tertiary check, one negative control)
QUICK = {("benzhydryl chloride", "80E20W"), ("benzhydryl chloride", "TFE"), ("benzhydryl bromide", "80E20W"),
         ("tert-butyl chloride", "water"), ("tert-butyl chloride", "80E20W"), ("2-chloropropane", "water")}


def rate_rows(quick: bool = False) -> list[dict]:
    rows = list(load_table("solvolysis_rates"))
    return [r for r in rows if (r["name"], r["medium"]) in QUICK] if quick else rows


def run_rate_checks(settings: Settings | None = None, *, quick: bool = False, workers: int = 1,
                    store: ResultStore | None = None, progress: Callable | None = None) -> dict:
    """Predict every published rate; statistics over the calibrated class, flags for the others."""
    from cationcalc.tasks.runner import run_task

    settings = settings or Settings()
    rows = rate_rows(quick)
    by_medium: dict[str, list[dict]] = defaultdict(list)
    for row in rows:
        by_medium[row["medium"]].append(row)
    entries = []
    for medium_name, group in by_medium.items():
        records = run_task("rate", [(r["substrate_smiles"], r["name"]) for r in group], settings, workers=workers,
                           store=store, progress=progress, medium=medium_name, rate_temperature_k=298.15)
        for row in group:
            record = next((x for x in records if x.get("name") == row["name"]), None)
            entries.append(_entry(row, record))
    calibrated = [e for e in entries if e.get("status_in_model") in ("calibrated", "checked") and e.get("error_lg")
                  is not None]
    benzhydryl = [e for e in calibrated if e["status_in_model"] == "calibrated"]
    outside = [e for e in entries if e.get("status_in_model") == "outside the SN1 model"]
    ef, e = electrofugality_calibration(), electrophilicity_calibration()
    return {
        "title": "solvolysis rate constants (25 °C) against the electrofuge–nucleofuge equation with computed E_f",
        "entries": entries,
        "benzhydryl": error_statistics([x["error_lg"] for x in benzhydryl]),
        "calibrated_and_checked": error_statistics([x["error_lg"] for x in calibrated]),
        "outside_flagged": all(x["status_in_model"] == "outside the SN1 model" for x in entries
                               if x.get("expected_outside")),
        "outside_lower_bound_holds": [x["name"] for x in outside if x.get("lower_bound_holds")],
        "outside_lower_bound_fails": [x["name"] for x in outside if x.get("lower_bound_holds") is False],
        "E_f_calibration": _calibration_summary(ef),
        "E_calibration": _calibration_summary(e),
    }


def _entry(row: dict, record: dict | None) -> dict:
    published = math.log10(float(row["k_per_s"]))
    entry = {"name": row["name"], "smiles": row["substrate_smiles"], "medium": row["medium"],
             "lg_k_published": round(published, 2), "source": row["source"], "status": row["status"],
             "expected_outside": "solvent-assisted" in row["notes"] or "not SN1" in row["notes"]
                                 or "SN2" in row["notes"]}
    if record is None or record.get("error"):
        entry["error"] = (record or {}).get("error", "not computed")
        return entry
    entry.update({"status_in_model": record["applicability_status"], "rate_class": record["rate_class"],
                  "E_f_computed": record["E_f_computed"], "lg_k_predicted": record["lg_k_ion_computed"],
                  "uncertainty_lg": record["lg_k_ion_computed_uncertainty"]})
    if entry["status_in_model"] == "outside the SN1 model":
        entry["lower_bound_holds"] = published >= record["lg_k_ion_computed"] - record[
            "lg_k_ion_computed_uncertainty"]
        entry["error_lg"] = None
    else:
        entry["error_lg"] = round(record["lg_k_ion_computed"] - published, 2)
    return entry


def _calibration_summary(cal) -> dict:
    return {"scale": cal.scale, "level": cal.level, "descriptor": cal.quantity, "n": cal.n, "slope": round(cal.a, 5),
            "intercept": round(cal.b, 3), "r": round(cal.r, 4), "loo_mae": round(cal.loo_mae, 3),
            "loo_rmse": round(cal.loo_rmse, 3), "loo_max": round(cal.loo_max, 3), "members": cal.loo_table()}


def format_rate_checks(report: dict) -> list[str]:
    """The kinetics section of the check report (Markdown-friendly lines)."""
    lines = [f"## {report['title']} [rates]"]
    for key in ("E_f_calibration", "E_calibration"):
        c = report[key]
        lines.append(f"{c['scale']} calibration: {c['scale']} ≈ {c['slope']:.4f}·HIA {c['intercept']:+.2f} at "
                     f"{c['level']} over {c['n']} benzhydrylium ions: r {c['r']:+.3f}, leave-one-out MAE "
                     f"{c['loo_mae']:.2f}, RMSE {c['loo_rmse']:.2f}, max {c['loo_max']:.2f}")
    b, a = report["benzhydryl"], report["calibrated_and_checked"]
    if b["n"]:
        lines.append(f"benzhydryl rows (calibrated class, E_f computed, leave-one-out): n {b['n']}, MAE "
                     f"{b['mae']:.2f}, RMSE {b['rmse']:.2f}, max {b['max']:.2f} log units")
    if a["n"]:
        lines.append(f"with the tertiary (checked) rows: n {a['n']}, MAE {a['mae']:.2f}, max {a['max']:.2f}")
    lines.append("| substrate | medium | lg k published | lg k predicted (computed E_f) | error | model | source |")
    lines.append("|---|---|---|---|---|---|---|")
    for e in report["entries"]:
        if e.get("error"):
            lines.append(f"| {e['name']} | {e['medium']} | {e['lg_k_published']:+.2f} | error: {e['error']} | | | |")
            continue
        if e.get("error_lg") is None:
            bound = "published ≥ SN1-only bound" if e.get("lower_bound_holds") else "BELOW the SN1-only bound"
            predicted, error = f"SN1 only {e['lg_k_predicted']:+.2f}", bound
        else:
            predicted, error = f"{e['lg_k_predicted']:+.2f} ± {e['uncertainty_lg']:.2f}", f"{e['error_lg']:+.2f}"
        lines.append(f"| {e['name']} | {e['medium']} | {e['lg_k_published']:+.2f} | {predicted} | {error} | "
                     f"{e['status_in_model']} | {e['source'][:60]} [{e['status']}] |")
    lines.append(f"solvent-assisted controls flagged as outside the SN1 model: "
                 f"{'yes' if report['outside_flagged'] else 'NO'}")
    return lines


def plot_rates(report: dict, path: str | os.PathLike) -> object:
    """Predicted against published lg k, calibrated and checked rows with error bars; controls as bounds."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(5.5, 5))
    for status, marker, colour in (("calibrated", "o", "#1b6f8a"), ("checked", "s", "#b5651d")):
        rows = [e for e in report["entries"] if e.get("status_in_model") == status and e.get("error_lg") is not None]
        if rows:
            ax.errorbar([e["lg_k_published"] for e in rows], [e["lg_k_predicted"] for e in rows],
                        yerr=[e["uncertainty_lg"] for e in rows], fmt=marker, color=colour, capsize=2,
                        label=f"{status} ({len(rows)})")
    bounds = [e for e in report["entries"] if e.get("status_in_model") == "outside the SN1 model"]
    if bounds:
        ax.scatter([e["lg_k_published"] for e in bounds], [e["lg_k_predicted"] for e in bounds], marker="v",
                   color="#888888", label="outside the model: SN1-only lower bound")
    values = [v for e in report["entries"] for v in (e.get("lg_k_published"), e.get("lg_k_predicted")) if v is not None]
    low, high = min(values) - 0.5, max(values) + 0.5
    ax.plot([low, high], [low, high], color="black", lw=0.8)
    ax.fill_between([low, high], [low - 0.7, high - 0.7], [low + 0.7, high + 0.7], color="#dddddd", alpha=0.5,
                    label="± 0.7 log units")
    ax.set_xlabel("lg k published (s⁻¹, 25 °C)")
    ax.set_ylabel("lg k predicted from computed E_f")
    ax.legend(fontsize=7)
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    plt.close(fig)
    return path


__all__ = ["run_rate_checks", "format_rate_checks", "plot_rates", "rate_rows", "QUICK"]
