"""Study outputs: results.csv/json, provenance.json, an SDF, XYZ files and one self-contained report.html.

:func:`write_outputs` writes every requested file of a study into its
output folder.  The pieces live by job: :mod:`cationcalc.report.files`
(CSV, JSON, SDF, XYZ, provenance, atomic writes), :mod:`cationcalc.report.figures`
(the PNG figures) and :mod:`cationcalc.report.html` (the report page); their
public names are importable from here as well.

Example
-------
>>> from cationcalc.report.outputs import TASK_TITLES
>>> TASK_TITLES["hia"]
'hydride-ion affinity'
"""

from __future__ import annotations

import json
from pathlib import Path

from cationcalc.report.figures import (CHARGE_COLOURS, CHARGE_SCALE, LADDER_QUANTITIES, colour_scale_png,
                                       depiction_png, drawn_structure, heavy_atom_charges, ladder_figure, ladder_png,
                                       record_label)
from cationcalc.execution.store import ResultStore
from cationcalc.report.files import (StudyPlan, csv_text, finite, library_versions, names_by_smiles, one_line, provenance,
                                     read_results, records_csv, records_json, spreadsheet_safe, structures_sdf,
                                     study_species, write_atomic, xyz_files)
from cationcalc.tasks.registry import SpecField
from cationcalc.report.html import TABLE_COLUMNS, report_html, task_table_html

TASK_TITLES = SpecField("report_title")

#: the name the run command imports for a record's label (:func:`cationcalc.report.figures.record_label`)
_label = record_label


def write_outputs(plan: StudyPlan, records: list[dict], store: ResultStore) -> list[Path]:
    """Write every requested output of a study; returns the paths (changed or not)."""
    out = plan.output_dir
    out.mkdir(parents=True, exist_ok=True)
    prov = provenance(plan, store)
    results = study_species(store)
    names = names_by_smiles(records)
    files: dict[Path, bytes] = {
        out / "provenance.json": (json.dumps(prov, indent=2, ensure_ascii=False) + "\n").encode()}
    if "json" in plan.formats:
        files[out / "results.json"] = records_json(records, prov)
    if "csv" in plan.formats:
        files[out / "results.csv"] = records_csv(records, prov)
    if "sdf" in plan.formats:
        files[out / "structures.sdf"] = structures_sdf(results, names, prov)
    if "xyz" in plan.formats:
        for fname, data in xyz_files(results, names, prov).items():
            files[out / "xyz" / fname] = data
    if "html" in plan.formats:
        files[out / "report.html"] = report_html(plan, records, results, prov, TASK_TITLES)
    for path, data in files.items():
        write_atomic(path, data)
    return list(files)


__all__ = ["write_outputs", "TASK_TITLES", "ladder_png", "ladder_figure", "depiction_png", "heavy_atom_charges",
           "report_html", "provenance", "drawn_structure", "task_table_html", "library_versions", "read_results",
           "write_atomic", "finite", "csv_text", "records_json", "records_csv", "structures_sdf", "xyz_files",
           "one_line", "spreadsheet_safe", "colour_scale_png", "CHARGE_SCALE", "CHARGE_COLOURS",
           "LADDER_QUANTITIES", "TABLE_COLUMNS", "record_label"]
