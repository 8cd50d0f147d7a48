"""The check report as Markdown-friendly text: per set, then the trend table, the rate set, the sources.

Example
-------
>>> from cationcalc.checks.text_report import short_source
>>> short_source("Houle, F. A.; Beauchamp, J. L. J. Am. Chem. Soc. 1979, 101, 4067 (read from the table)")
'Houle, F. A.; Beauchamp, J. L. J. Am. Chem. Soc. 1979, 101, 4067'
"""

from __future__ import annotations

import re


def short_source(source: str) -> str:
    """The citation without the verification remarks, e.g. 'Houle, F. A.; ... 1979, 101(15), 4067'."""
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
        for e in s["entries"]:
            sources.setdefault(e["source"], set()).add(key)
        lines += _set_lines(key, s)
    if report.get("skipped"):
        lines.append(f"not in this run (--quick keeps the cheap sets): {', '.join(report['skipped'])}")
        lines.append("")
    lines += _trend_lines(report)
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


def _set_lines(key: str, s: dict) -> list[str]:
    """One set: its statistics, the entries not computed or left out, its note and plot."""
    lines = [f"## {s['title']} [{key}] — {s['level']}"]
    lines += _absolute_lines(s) if s["kind"] == "absolute" else _correlation_lines(s)
    for e in s["entries"]:
        if e.get("error"):
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
    return lines


def _absolute_lines(s: dict) -> list[str]:
    """Raw, LOO-calibrated and stored-calibration errors, per class group, worst five."""
    raw = s["raw"]
    lines = [f"n = {raw['n']} (anchor tert-butyl excluded); errors = computed − experiment, kcal/mol"]
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
                     f"  [{short_source(w['source'])}; {w['status']}]")
    return lines


def _correlation_lines(s: dict) -> list[str]:
    """Slope, intercept, r, Spearman ρ (ρ⁺ or the ideal slope where they apply), the sign, worst five."""
    if s.get("r") is None:
        return [f"n = {s['n']}: too few points for a correlation"]
    extra = ""
    if s.get("rho_plus") is not None:
        extra = f"  ρ⁺ {s['rho_plus']:+.1f}"
    if s.get("ideal_slope") is not None:
        extra = f"  (ideal slope {s['ideal_slope']:.2f})"
    lines = [f"n = {s['n']}: slope {s['slope']:+.2f} kcal/mol per unit, intercept {s['intercept']:+.1f}, "
             f"r {s['r']:+.3f}, Spearman ρ {s['spearman_rho']:+.3f}{extra}; expected sign "
             f"{'+' if s['expected_sign'] > 0 else '−'}: {'ok' if s['sign_ok'] else 'WRONG'}"]
    if s.get("calibrated_slope") is not None:
        lines.append(f"after calibration ({s['calibration_id']}): slope {s['calibrated_slope']:+.2f}"
                     + (f", ρ⁺ {s['rho_plus'] * s['calibrated_slope'] / s['slope']:+.1f}"
                        if s.get("rho_plus") is not None else "") + "; r and ρ unchanged (linear map)")
    lines.append(f"worst five (experiment − line from computed, in units of {s['experiment']}):")
    for w in s["worst"]:
        lines.append(f"  {w['name']:<34} calc {w['calc']:8.2f}  exp {w['exp']:+7.2f}  {w['residual']:+6.2f}"
                     f"  [{short_source(w['source'])}; {w['status']}]")
    return lines


def _trend_lines(report: dict) -> list[str]:
    """The trend table, what calibration does to it, and each check's source."""
    lines = ["## trend checks", "| check | expectation | computed (kcal/mol) | experiment | verdict |",
             "|---|---|---|---|---|"]
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
    return lines


__all__ = ["format_report", "short_source"]
