"""Isodesmic anchor by class: does a structurally similar anchor cancel more error than tert-butyl?

The HIA of a cation X by hydride exchange with an anchor A is
HIA(X) = HIA_exp(A) + [HIA_calc(X) − HIA_calc(A)], so its error is
e(X) − e(A), where e is the error of each against the common tert-butyl
anchor.  For each cation of a class group with at least two published
members (allylic/benzylic: allyl, benzyl; heteroatom-stabilized: acetyl,
CF₃, formyl; alkyl: methyl, 2-propyl, 1-adamantyl), this script takes the
per-cation errors of a ``benchmarks/dft_levels.py`` result (every level it
holds: GFN2-xTB raw, DFT//xTB, DFT//DFT) and compares

* the tert-butyl anchor (what the pipeline does), with
* the nearest-class anchor: the class's preferred published anchor (benzyl
  for allylic/benzylic, acetyl for heteroatom-stabilized, 2-propyl for
  alkyl), or for the anchor cation itself the next member of its class (a
  cation is never its own anchor).

Temperatures are handled by dft_levels.py (0 K rows compared at 0 K), so
the errors can be subtracted directly.  Pure arithmetic on stored results:

    python benchmarks/class_anchors.py [--input results/dft_levels.json results/dft_geometries.json]

writes benchmarks/results/class_anchors.md and .json.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from cationcalc.chem.ionization import cation_class  # noqa: E402
from cationcalc.chem.reference import class_anchor, class_anchor_rule, load_table  # noqa: E402
from cationcalc.chem.species import carbocation  # noqa: E402
from cationcalc.trust.calibration import cation_group  # noqa: E402

#: per class group, the anchors in order of preference (names of the bundled gas-phase table)
CLASS_ANCHORS = {
    "allylic/benzylic": ("benzyl (0 K, onset)", "allyl"),
    "heteroatom-stabilized": ("acetyl (ATcT-based acetaldehyde)", "formyl HCO+"),
    "alkyl": ("2-propyl", "methyl"),
}
#: columns that are not a raw hydride exchange (a calibration already corrects them)
SKIP_COLUMNS = ("GFN2-xTB calibrated",)


def anchor_for(name: str, group: str, available: set[str]) -> str | None:
    """The class anchor of a cation: the first preferred anchor of its group that is not itself."""
    return next((a for a in CLASS_ANCHORS.get(group, ()) if a != name and a in available), None)


def measure(per_species: dict[str, dict]) -> dict:
    smiles = {r["name"]: r["cation_smiles"] for r in load_table("gas_hydride_ion_affinities")}
    columns = [c for c in dict.fromkeys(k for v in per_species.values() for k in v)
               if c not in ("exp", "status") and c not in SKIP_COLUMNS]
    names = [n for n in per_species if n in smiles]  # rows dropped from the table since the run are left out
    groups = {n: cation_group(smiles[n])[1] for n in names}
    rows, errors = [], {c: {"tert-butyl": [], "class": []} for c in columns}
    for name in names:
        group = groups[name]
        anchor = anchor_for(name, group, {n for n in names if groups[n] == group})
        row = {"cation": name, "group": group, "anchor": anchor}
        for c in columns:
            e = per_species[name].get(c)
            e = None if e is None else e - per_species[name]["exp"]
            row[f"{c} | tert-butyl"] = e
            if anchor is not None and e is not None and per_species[anchor].get(c) is not None:
                e_class = e - (per_species[anchor][c] - per_species[anchor]["exp"])
                row[f"{c} | class"] = e_class
                errors[c]["tert-butyl"].append(abs(e))
                errors[c]["class"].append(abs(e_class))
        rows.append(row)
    summary = {c: {k: (round(float(np.mean(v)), 2) if v else None) for k, v in e.items()} | {"n": len(e["class"])}
               for c, e in errors.items()}
    by_group = {}
    for group in dict.fromkeys(groups.values()):
        members = [r for r in rows if r["group"] == group and r["anchor"] is not None]
        per_column = {}
        for c in columns:
            pairs = [r for r in members if r.get(f"{c} | class") is not None]
            if pairs:
                per_column[c] = {k: round(float(np.mean([abs(r[f"{c} | {k}"]) for r in pairs])), 2)
                                 for k in ("tert-butyl", "class")}
        if per_column:
            by_group[group] = per_column
    return {"columns": columns, "rows": rows, "summary": summary, "by_group": by_group,
            "shipped": shipped_rule(per_species, names, smiles, columns)}


def shipped_rule(per_species: dict[str, dict], names: list[str], smiles: dict[str, str], columns: list[str]) -> dict:
    """Every row anchored as the pipeline anchors DFT-refined values (:func:`class_anchor`), against tert-butyl."""
    by_cation = {carbocation(smiles[n]).smiles: n for n in names}
    rows, errors = [], {c: {"tert-butyl": [], "rule": []} for c in columns}
    for name in names:
        anchor = class_anchor(smiles[name], cation_class(carbocation(smiles[name])))
        anchor_row = by_cation.get(carbocation(anchor.cation_smiles).smiles)  # None: tert-butyl, error 0 by definition
        row = {"cation": name, "anchor": anchor.name}
        for c in columns:
            e = per_species[name].get(c)
            if e is None or (anchor_row is not None and per_species[anchor_row].get(c) is None):
                continue
            e -= per_species[name]["exp"]
            e_rule = e if anchor_row is None else e - (per_species[anchor_row][c] - per_species[anchor_row]["exp"])
            row[c] = round(e_rule, 2)
            errors[c]["tert-butyl"].append(abs(e))
            errors[c]["rule"].append(abs(e_rule))
        rows.append(row)
    summary = {c: {"n": len(v["rule"]), **{k: round(float(np.mean(x)), 2) for k, x in v.items() if x}}
               for c, v in errors.items()}
    return {"rule": class_anchor_rule(), "rows": rows, "summary": summary}


def markdown(result: dict, source: str) -> str:
    cols = result["columns"]
    lines = ["# Isodesmic anchor by class", "",
             f"Errors (computed − experiment, kcal/mol) of the gas-phase HIA by hydride exchange with tert-butyl "
             f"(236.7 kcal/mol, Keister, Riley, Baer 1993) and with the nearest-class anchor (its published value "
             f"from the bundled table); per-cation errors from `{source}`.", "",
             "| cation | class group | class anchor | " + " | ".join(f"{c}: tBu | {c}: class" for c in cols) + " |",
             "|---|---|---|" + "---|---|" * len(cols)]
    fmt = lambda v: "" if v is None else f"{v:+.1f}"  # noqa: E731
    for r in result["rows"]:
        lines.append(f"| {r['cation']} | {r['group']} | {r['anchor'] or '—'} | " + " | ".join(
            f"{fmt(r.get(f'{c} | tert-butyl'))} | {fmt(r.get(f'{c} | class'))}" for c in cols) + " |")
    lines += ["", "MAE over the cations that have a class anchor (n per level):", "",
              "| level | n | tert-butyl anchor | class anchor |", "|---|---|---|---|"]
    for c, s in result["summary"].items():
        lines.append(f"| {c} | {s['n']} | {s['tert-butyl']} | {s['class']} |")
    lines += ["", "Per class group (MAE, tert-butyl anchor → class anchor):", ""]
    for group, per in result["by_group"].items():
        lines.append(f"- {group}: " + "; ".join(f"{c} {v['tert-butyl']} → {v['class']}" for c, v in per.items()))
    shipped = result["shipped"]
    lines += ["", f"## The rule the pipeline ships for DFT-refined values ({shipped['rule']})", "",
              "`cationcalc.chem.reference.class_anchor` applied to every row (a cation is never its own anchor), "
              "errors in kcal/mol:", "",
              "| cation | anchor | " + " | ".join(cols) + " |", "|---|---|" + "---|" * len(cols)]
    for r in shipped["rows"]:
        lines.append(f"| {r['cation']} | {r['anchor']} | " + " | ".join(fmt(r.get(c)) for c in cols) + " |")
    lines += ["", "| level | n | MAE, tert-butyl anchor | MAE, shipped rule |", "|---|---|---|---|"]
    for c, v in shipped["summary"].items():
        lines.append(f"| {c} | {v['n']} | {v.get('tert-butyl')} | {v.get('rule')} |")
    return "\n".join(lines) + "\n"


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--input", nargs="+", default=[str(HERE / "results" / "dft_levels.json"),
                                                       str(HERE / "results" / "dft_geometries.json")],
                        help="dft_levels.py results; their per-cation columns are merged (later files add columns)")
    parser.add_argument("--output", default=str(HERE / "results" / "class_anchors"))
    args = parser.parse_args(argv)
    per_species: dict[str, dict] = {}
    for path in args.input:
        for name, values in json.loads(Path(path).read_text())["per_species"].items():
            per_species.setdefault(name, {}).update(values)
    result = measure(per_species)
    Path(args.output + ".json").write_text(json.dumps(result, indent=1))
    text = markdown(result, ", ".join(Path(p).name for p in args.input))
    Path(args.output + ".md").write_text(text)
    print(text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
