"""The study's report.html: one self-contained page (nothing fetched from the network).

The study table per task (its reading view, with every number behind a
fold), the stability ladder, half-lives, 2-D depictions of each cation
shaded by its GFN2-xTB partial charges, warnings and the provenance with the
workflow file itself; images are embedded PNGs.  :func:`report_html` builds
the page from one function per section, top to bottom.
"""

from __future__ import annotations

import base64
import html
import json
from typing import Mapping

from cationcalc.about import SAFETY_NOTE
from cationcalc.compute.models import SpeciesResult
from cationcalc.report.figures import (CHARGE_SCALE, LADDER_QUANTITIES, colour_scale_png, depiction_png,
                                       drawn_structure, half_life_png, ladder_png, record_label)
from cationcalc.report.files import StudyPlan, jsonable

#: the full-data table of a task (behind 'all numbers' in the report)
TABLE_COLUMNS = {
    "hia": ["hia_kcal_mol", "hia_kJ_mol", "hia_G_kcal_mol", "cation_smiles", "rearranged"],
    "heterolysis": ["leaving_group", "dE_het_kcal_mol", "dH_het_kcal_mol", "dG_het_kcal_mol", "dG_het_kJ_mol",
                    "cation_smiles"],
    "thermo": ["smiles", "E_hartree", "zpe_kcal_mol", "H_kcal_mol", "G_kcal_mol", "S_J_mol_K", "point_group"],
    "rate": ["leaving_group", "medium", "k_ion_per_s", "lg_k_ion_text", "half_life_text", "half_life_range_text",
             "E_f", "E_f_computed", "N_f", "s_f", "lifetime_text", "applicability_status", "verdict"],
}


_CSS = """
body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;margin:2em auto;max-width:1150px;color:#222;
 padding:0 1em}
h1{margin-bottom:.2em} h2{margin-top:1.6em;border-bottom:1px solid #ccc}
table{border-collapse:collapse;font-size:.88em;margin:.5em 0}
div.wrap{max-width:100%;overflow-x:auto} table.results{width:100%}
table.results td{overflow-wrap:normal;vertical-align:top} td.smiles code{white-space:nowrap}
td.verdict{min-width:14em} td.verdict small{color:#555}
td.tier-leading{background:#d97a00;color:#fff} td.tier-competing{background:#f3c98b} td.tier-minor{color:#777}
th,td{border:1px solid #ccc;padding:3px 7px;text-align:left}
th{background:#f2f2f2} td.num{text-align:right;font-variant-numeric:tabular-nums}
.caution{background:#fff4e5;border-left:4px solid #e69500;padding:.6em 1em}
.error{color:#b00020} .grid{display:flex;flex-wrap:wrap;gap:12px}
figure{margin:0;border:1px solid #ddd;padding:4px;width:330px} figcaption{font-size:.8em}
pre{background:#f7f7f7;padding:.8em;overflow-x:auto;font-size:.85em}
"""


def _img(data: bytes, alt: str) -> str:
    return f'<img alt="{html.escape(alt)}" src="data:image/png;base64,{base64.b64encode(data).decode()}">'


def _cell(value) -> str:
    if value is None:
        return "<td></td>"
    if isinstance(value, bool):
        return f"<td>{'yes' if value else ''}</td>"
    if isinstance(value, (int, float)):
        return f'<td class="num">{value}</td>'
    if isinstance(value, (list, dict)):
        value = json.dumps(value, ensure_ascii=False, default=jsonable)
    return f"<td>{html.escape(str(value))}</td>"


def _solvent(record: dict) -> str:
    solvent = record.get("solvent")
    return "gas" if solvent in (None, "none") else str(solvent)


def _task_columns(task: str, rows: list[dict]) -> list[str]:
    if task in TABLE_COLUMNS:
        return TABLE_COLUMNS[task]
    cols: list[str] = []
    for r in rows:
        for k in r:
            if (k.endswith("_kcal_mol") or k.endswith("_kJ_mol") or k in ("verdict", "site_atom", "leaving_group")) \
                    and k not in cols and not k.startswith("reference"):
                cols.append(k)
    return cols[:10]


def _centre_text(result: SpeciesResult) -> str:
    """The most positive carbon's own charge and its CHn group charge, labelled."""
    mol, _ = drawn_structure(result)
    if mol is None or result.charge <= 0:
        return ""
    own = list(result.partial_charges[:mol.GetNumAtoms()])
    carbons = [a.GetIdx() for a in mol.GetAtoms() if a.GetAtomicNum() == 6]
    if not carbons:
        return ""
    centre = max(carbons, key=lambda i: own[i])
    group = own[centre]
    from cationcalc.chem.bonding import bonds_from_geometry

    for a, b in bonds_from_geometry(result.numbers, result.positions_angstrom):
        if centre in (a, b) and result.numbers[a + b - centre] == 1:
            group += result.partial_charges[a + b - centre]
    return f"most positive carbon C{centre}: own charge {own[centre]:+.2f} e, CH group charge {group:+.2f} e"


def task_table_html(task: str, rows: list[dict]) -> str:
    """One task's rows as an HTML table of its reading view, plus solvent, verdict reason and a short note."""
    from cationcalc.report.columns import VERDICT, cell, note, view

    esc = html.escape
    columns = view(task, rows)
    head = "".join(f"<th>{esc(c.header)}</th>" for c in columns)
    # the rate task's medium is a column of its own; its species are computed at the E_f level, not in a solvent
    where = "" if task == "rate" else "<th>solvent</th>"
    out = [f'<div class="wrap"><table class="results"><thead><tr>{head}{where}<th>note</th></tr>'
           "</thead><tbody>"]
    for r in rows:
        cells = []
        for c in columns:
            text = cell(c, r, shorten=False)
            if c is VERDICT and text:
                reason = r.get("verdict_reason") or ""
                cells.append(f'<td class="verdict"><b>{esc(text)}</b><br><small>{esc(reason)}</small></td>')
            elif c.key == "tier" and text:
                cells.append(f'<td class="tier tier-{esc(text)}">{esc(text)}</td>')
            elif c.kind == "smiles":
                cells.append(f'<td class="smiles"><code>{esc(text)}</code></td>')
            elif c.kind in ("value", "int", "factor"):
                cells.append(f'<td class="num">{esc(text)}</td>')
            else:
                cells.append(f"<td>{esc(text)}</td>")
        flag = note(r)
        if r.get("error"):
            flag = f'<span class="error">error: {esc(str(r["error"]))}</span>' + (
                "; " + esc(flag.replace("error", "", 1).strip("; ")) if flag.strip() != "error" else "")
        else:
            flag = esc(flag)
        solvent = "" if task == "rate" else f"<td>{esc(_solvent(r))}</td>"
        out.append("<tr>" + "".join(cells) + f"{solvent}<td>{flag}</td></tr>")
    out.append("</tbody></table></div>")
    return "".join(out)


def report_html(plan: StudyPlan, records: list[dict], results: list[SpeciesResult], prov: dict,
                task_titles: Mapping[str, str]) -> bytes:
    """The whole page as UTF-8 bytes; ``task_titles`` names each task's table (task name → title)."""
    parts = _header(plan, records)
    parts += _ladders_section(plan, records)
    parts += _half_lives_section(records)
    parts += _results_section(plan, records, task_titles)
    parts += _charges_section(records, results)
    parts += _warnings_section(records)
    parts += _provenance_section(plan, prov)
    parts.append("</body></html>\n")
    return "".join(parts).encode()


def _header(plan, records: list[dict]) -> list[str]:
    """Title, description, the safety note and one line on what was computed."""
    wf = plan.workflow
    esc = html.escape
    parts = [f"<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>{esc(wf.study)} — cationcalc "
             f"study</title><style>{_CSS}</style></head><body>"]
    parts.append(f"<h1>{esc(wf.study)}</h1>")
    if wf.description:
        parts.append(f"<p>{esc(wf.description)}</p>")
    parts.append(f'<p class="caution"><b>Caution.</b> {esc(SAFETY_NOTE)}</p>')
    errors = [r for r in records if r.get("error")]
    parts.append(f"<p>{len(records)} rows ({len(errors)} with errors): {len(plan.items)} species × "
                 f"{len(plan.tasks)} task{'s' if len(plan.tasks) != 1 else ''} "
                 f"({', '.join(t.name for t in plan.tasks)}) "
                 f"× {len(plan.solvents)} solvent{'s' if len(plan.solvents) != 1 else ''} "
                 f"({', '.join(esc(plan.settings[s].level) for s in plan.solvents)}), {wf.method.temperature_k} K. "
                 "Energies in kcal/mol unless the column says kJ/mol.</p>")
    return parts


def _ladders_section(plan, records: list[dict]) -> list[str]:
    """The stability ladder of each task that has one."""
    esc = html.escape
    ladders = []
    for task in plan.tasks:
        if task.name in LADDER_QUANTITIES:
            quantity, title, hint = LADDER_QUANTITIES[task.name]
            png = ladder_png([r for r in records if r.get("task") == task.name], quantity, title)
            if png is not None:
                ladders.append((task.name, title, hint, png))
    if not ladders:
        return []
    parts = ["<h2>Stability ladder</h2>"]
    for task_name, title, hint, png in ladders:
        parts.append(f"<h3>{esc(title)} ({esc(task_name)})</h3><p>Sorted by the first solvent; {esc(hint)}. "
                     f"Error bars where the records carry an uncertainty.</p>{_img(png, f'ladder of {title}')}")
    return parts


def _half_lives_section(records: list[dict]) -> list[str]:
    """How fast: half-lives (rate task, and ionize/ladder records given a medium)."""
    esc = html.escape
    timed = [r for r in records if isinstance(r.get("half_life_s"), (int, float)) and not r.get("error")]
    if not timed:
        return []
    outside = [r for r in records if r.get("applicability_status") == "outside the SN1 model"]
    parts = ["<h2>How fast: half-lives</h2><p>Half-life of R–X from lg k = s<sub>f</sub>(N<sub>f</sub> + "
             "E<sub>f</sub>) in each medium at the stated temperature; bars span the lg k uncertainty.</p>"
             + _img(half_life_png(timed), "half-life chart")]
    if outside:
        parts.append("<p>Outside the SN1 model (no half-life given): " + "; ".join(
            f"{esc(record_label(r))} in {esc(str(r.get('medium')))}: {esc(str(r.get('applicability')))}"
            for r in outside) + "</p>")
    return parts


def _results_section(plan, records: list[dict], task_titles: Mapping[str, str]) -> list[str]:
    """Per task: its reading view (report/columns.py) and, folded, every number; every key is in results.csv/json."""
    esc = html.escape
    parts = ["<h2>Results</h2><p>One row per substrate × solvent with the answer a chemist reads first; "
             "± is the error bar of each number (for ΔΔG_ion and differences between sites, the error of "
             "the difference: see <code>*_uncertainty_basis</code> in results.json). Every other key is in "
             "results.csv and results.json.</p>"]
    for task in plan.tasks:
        rows = [r for r in records if r.get("task") == task.name]
        if not rows:
            continue
        parts.append(f"<h3>{esc(task_titles.get(task.name, task.name))} ({esc(task.name)})</h3>")
        if task.name == "sites":
            parts.append("<p>Site tiers (this project's): <b>leading</b> when the gap to the best site is within "
                         "the error of that gap or within 1.4 kcal/mol (a factor 10 in K at 298 K), "
                         "<b>competing</b> within 4.1 kcal/mol (a factor 1000), <b>minor</b> beyond.</p>")
        parts.append(task_table_html(task.name, rows))
        parts += _all_numbers_table(task.name, rows)
    return parts


def _all_numbers_table(task: str, rows: list[dict]) -> list[str]:
    """The folded full-data table of one task (record keys as in results.csv)."""
    esc = html.escape
    cols = _task_columns(task, rows)
    parts = ["<details><summary>all numbers of this table (record keys as in results.csv)</summary>"
             '<div class="wrap"><table class="full"><thead><tr><th>name</th><th>input</th><th>solvent</th>'
             + "".join(f"<th>{esc(c)}</th>" for c in cols) + "</tr></thead><tbody>"]
    for r in rows:
        parts.append("<tr>" + _cell(r.get("name")) + _cell(r.get("input")) + _cell(_solvent(r))
                     + "".join(_cell(r.get(c)) for c in cols) + "</tr>")
    parts.append("</tbody></table></div></details>")
    return parts


def _cations_drawn(records: list[dict], by_key: dict) -> list[tuple[str, str | None, str]]:
    """(cation SMILES, solvent, label) of each computed cation once, in record order."""
    cations: list[tuple[str, str | None, str]] = []
    for r in records:
        smi = r.get("cation_smiles")
        solvent = None if r.get("solvent") in (None, "none") else r.get("solvent")
        if isinstance(smi, str) and (smi, solvent) in by_key and (smi, solvent, record_label(r)) not in cations:
            if not any(c[0] == smi and c[1] == solvent for c in cations):
                cations.append((smi, solvent, record_label(r)))
    return cations


def _cation_figure(result: SpeciesResult, smi: str, label: str) -> str | None:
    """One cation drawn shaded by its charges, with a caption, or None when it cannot be drawn."""
    esc = html.escape
    png = depiction_png(result)
    if png is None:
        return None
    _, relaxed = drawn_structure(result)
    extra = (f"; not a minimum as asked: drawn as it relaxed ({esc(result.relaxed_smiles or 'bridged')})"
             if relaxed else "")
    centre = _centre_text(result)
    if centre:
        extra += f"; {esc(centre)}"
    return (f"<figure>{_img(png, f'{label} partial charges')}<figcaption><b>{esc(label)}</b> "
            f"<code>{esc(smi)}</code>, {esc(result.level)}{extra}</figcaption></figure>")


def _charges_section(records: list[dict], results: list[SpeciesResult]) -> list[str]:
    """Cations shaded by their partial charges, with the colour scale."""
    by_key = {(r.smiles, r.solvent): r for r in results}
    pictures = [figure for smi, solvent, label in _cations_drawn(records, by_key)
                if (figure := _cation_figure(by_key[(smi, solvent)], smi, label)) is not None]
    if not pictures:
        return []
    return ["<h2>Charge delocalization</h2><p>GFN2-xTB partial charges (e) of each optimised cation, "
            "drawn on the structure as optimised (a cation that relaxed to other bonds is drawn as it "
            "relaxed). Each number is the atom's <b>own</b> charge: hydrogen charges are not summed onto "
            "the heavy atom they are bound to (the caption gives the CH<sub>n</sub> group charge of the "
            "cationic centre). Colours are this project's: amber for positive, teal for negative, full "
            f"colour at |q| ≥ {CHARGE_SCALE} e. A charge spread over several atoms shows "
            f"delocalization.</p>{_img(colour_scale_png(), 'colour scale')}",
            '<div class="grid">' + "".join(pictures) + "</div>"]


def _warnings_section(records: list[dict]) -> list[str]:
    """Errors first, then every warning, each with its record, task and solvent."""
    esc = html.escape
    errors = [r for r in records if r.get("error")]
    notes = [(r, w) for r in records for w in r.get("warnings", [])]
    parts = ["<h2>Warnings and errors</h2>"]
    if not (notes or errors):
        return parts + ["<p>None.</p>"]
    parts.append("<ul>")
    for r in errors:
        parts.append(f'<li class="error">{esc(record_label(r))} — {esc(r["task"])}, {esc(_solvent(r))}: '
                     f"{esc(str(r['error']))}</li>")
    for r, w in notes:
        parts.append(f"<li>{esc(record_label(r))} — {esc(r['task'])}, {esc(_solvent(r))}: {esc(str(w))}</li>")
    parts.append("</ul>")
    return parts


def _provenance_section(plan, prov: dict) -> list[str]:
    """Provenance table, the settings and the workflow file as it was read."""
    esc = html.escape
    parts = ["<h2>Provenance</h2><table><tbody>"]
    rows = [("study", prov["study"]), ("workflow file", prov["workflow_file"]),
            ("workflow SHA-256", prov["workflow_sha256"])]
    rows += [(f"species file {k}", f"SHA-256 {v}") for k, v in prov["input_files"].items()]
    rows += [("levels of theory", ", ".join(prov["levels"])),
             ("computed (UTC)", f"{prov['computed']['first']} to {prov['computed']['last']}")]
    rows += [(k, v) for k, v in prov["versions"].items()]
    parts += [f"<tr><th>{esc(k)}</th><td>{esc(str(v))}</td></tr>" for k, v in rows]
    parts.append("</tbody></table>")
    parts.append("<h3>Settings</h3><pre>" + esc(json.dumps(prov["settings"], indent=1)) + "</pre>")
    parts.append(f"<h3>Workflow file ({esc(prov['workflow_file'])})</h3><pre>{esc(plan.loaded.text)}</pre>")
    return parts


__all__ = ["report_html", "task_table_html", "TABLE_COLUMNS"]
