"""Study outputs: results.csv/json, an SDF, XYZ files and one self-contained report.html.

Every file carries the provenance of the study: the SHA-256 of the workflow
file (and of its species files), the study name and the versions of
cationcalc and the libraries that determine the numbers.

* ``results.json``: ``{"provenance": {...}, "records": [...]}``, one record
  per species × task × solvent with the keys the command line prints, plus
  ``task``;
* ``results.csv``: the same records; the first line is a ``#`` comment with
  the provenance (read it with ``pandas.read_csv(..., comment="#")``); lists
  are JSON text;
* ``provenance.json``: the full provenance block on its own;
* ``structures.sdf``: every optimised species of the study with its
  properties as SD tags (connectivity as drawn; ``rearranged`` says when the
  geometry relaxed to other bonds);
* ``xyz/*.xyz``: one extended-XYZ file per species, properties in the comment line;
* ``report.html``: the study table, the stability ladder, 2-D depictions of
  each cation shaded by its GFN2-xTB partial charges, warnings and the
  provenance with the workflow file itself; images are embedded PNGs, nothing
  is fetched from the network.

The ``computed`` date range is when the species were computed (from the
store), so re-running an unchanged study rewrites byte-identical files; a
file whose content did not change is left untouched.  Writes are atomic
(temporary file in the same folder, then rename).

Example
-------
>>> from cationcalc.report.outputs import ladder_png
>>> records = [{"task": "hia", "name": "tert-butyl", "solvent": "none", "hia_kcal_mol": 236.7},
...            {"task": "hia", "name": "2-propyl", "solvent": "none", "hia_kcal_mol": 251.9,
...             "hia_uncertainty_kcal_mol": 2.0}]
>>> ladder_png(records, "hia_kcal_mol")[:8] == b"\\x89PNG\\r\\n\\x1a\\n"
True
"""

from __future__ import annotations

import base64
import html
import io
import json
import math
import os
import platform
import re
import tempfile
from collections.abc import Mapping
from importlib import metadata
from pathlib import Path

from cationcalc.about import SAFETY_NOTE, __version__
from cationcalc.chem import units
from cationcalc.compute.models import SpeciesResult

#: libraries whose versions go into every output (the ones that determine or draw the numbers)
LIBRARIES = ("tblite", "xtb", "rdkit", "ase", "numpy", "scipy", "pydantic", "PyYAML", "matplotlib")

#: the quantity a stability ladder is drawn for, per task (title, how to read it)
LADDER_QUANTITIES = {
    "hia": ("hia_kcal_mol", "hydride-ion affinity (HIA)", "higher HIA: less stable cation"),
    "ionize": ("dG_ion_kcal_mol", "ΔG of ionization", "higher ΔG: harder to ionize"),
    "sites": ("dG_ion_kcal_mol", "ΔG of ionization per site", "higher ΔG: harder to ionize"),
    "ladder": ("dG_ion_kcal_mol", "ΔG of ionization per leaving group", "higher ΔG: harder to ionize"),
    "heterolysis": ("dG_het_kcal_mol", "ΔG of heterolysis R–X → R⁺ + X⁻", "higher ΔG: harder to ionize"),
}

#: the full-data table of a task (behind 'all numbers' in the report)
TABLE_COLUMNS = {
    "hia": ["hia_kcal_mol", "hia_kJ_mol", "hia_G_kcal_mol", "cation_smiles", "rearranged"],
    "heterolysis": ["leaving_group", "dE_het_kcal_mol", "dH_het_kcal_mol", "dG_het_kcal_mol", "dG_het_kJ_mol",
                    "cation_smiles"],
    "thermo": ["smiles", "E_hartree", "zpe_kcal_mol", "H_kcal_mol", "G_kcal_mol", "S_J_mol_K", "point_group"],
    "rate": ["leaving_group", "medium", "k_ion_per_s", "lg_k_ion_text", "half_life_text", "half_life_range_text",
             "E_f", "E_f_computed", "N_f", "s_f", "lifetime_text", "applicability_status", "verdict"],
}


# ---------------------------------------------------------------------------------------------
# provenance and file writing
# ---------------------------------------------------------------------------------------------

def library_versions(engine: str = "tblite") -> dict[str, str]:
    versions = {"cationcalc": __version__, "python": platform.python_version()}
    for name in LIBRARIES:
        if name == "xtb" and engine != "xtb":
            continue
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            if name == "rdkit":
                import rdkit

                versions[name] = rdkit.__version__
            elif name != "xtb":
                versions[name] = "not installed"
    return versions


def provenance(plan, store) -> dict:
    """The provenance block shared by every output file of a study."""
    created = sorted(store.created(store.touched).values())
    wf = plan.workflow
    return {
        "study": wf.study,
        "description": wf.description,
        "workflow_file": plan.loaded.path.name,
        "workflow_sha256": plan.loaded.sha256,
        "input_files": dict(plan.input_files),
        "versions": library_versions(wf.method.engine),
        "levels": [plan.settings[s].level for s in plan.solvents],
        "settings": {(s or "gas"): plan.settings[s].model_dump(mode="json") for s in plan.solvents},
        "tasks": {t.name: t.options for t in plan.tasks},
        "computed": {"first": created[0] if created else None, "last": created[-1] if created else None},
        "units": "energies in kcal/mol (and kJ/mol where the key says so); E, H, G of species in hartree",
        "safety_note": SAFETY_NOTE,
    }


def _short(prov: dict) -> str:
    versions = " ".join(f"{k}={v}" for k, v in prov["versions"].items())
    return (f"cationcalc study={prov['study']} workflow={prov['workflow_file']} "
            f"workflow_sha256={prov['workflow_sha256']} {versions}")


_UMASK = os.umask(0o022)
os.umask(_UMASK)


def write_atomic(path: Path, data: bytes) -> bool:
    """Write ``data`` to ``path`` atomically; returns False (and leaves the file) when unchanged."""
    path = Path(path)
    try:
        if path.read_bytes() == data:
            return False
    except OSError:
        pass
    path.parent.mkdir(parents=True, exist_ok=True)
    handle, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        os.chmod(tmp, 0o666 & ~_UMASK)  # mkstemp makes 0600; outputs are ordinary files
        with os.fdopen(handle, "wb") as out:
            out.write(data)
            out.flush()
            os.fsync(out.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    return True


def _jsonable(value):
    if hasattr(value, "item"):  # numpy scalars
        return value.item()
    if hasattr(value, "tolist"):
        return value.tolist()
    raise TypeError(f"cannot write {type(value).__name__} to JSON")


def finite(value):
    """``value`` with every NaN or infinite float replaced by None (JSON has no NaN; a reader would choke)."""
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, Mapping):  # a dict or a typed record
        return {k: finite(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [finite(v) for v in value]
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):  # numpy scalars
        return finite(value.item())
    if hasattr(value, "tolist"):
        return finite(value.tolist())
    return value


def records_json(records: list[dict], prov: dict) -> bytes:
    return (json.dumps(finite({"provenance": prov, "records": records}), indent=2, ensure_ascii=False,
                       default=_jsonable, allow_nan=False) + "\n").encode()


_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def spreadsheet_safe(value):
    """A text cell a spreadsheet would run as a formula (=, +, -, @ first) gets a leading single quote.

    Numbers, and text that reads as a plain number (-1.5), are left alone.  Common practice, no source.
    """
    if not isinstance(value, str) or not value.startswith(_FORMULA_START):
        return value
    try:
        float(value)
        return value
    except ValueError:
        return "'" + value


def one_line(text: str, limit: int | None = None) -> str:
    """``text`` without line breaks or control characters (an SDF title or XYZ comment is one line)."""
    flat = re.sub(r"[\x00-\x1f\x7f\x85\u2028\u2029]+", " ", str(text)).strip()
    flat = flat.replace("$$$$", "$ $ $ $")  # the SDF record separator
    if limit is not None and len(flat) > limit:
        flat = flat[: limit - 1] + "…"
    return flat


def csv_text(records: list[dict], comment: str | None = None) -> str:
    """Records as CSV: one column per key seen (in order), lists and dicts as JSON, optional # comment line."""
    import csv

    keys: list[str] = []
    for r in records:
        for k in r:
            if k not in keys:
                keys.append(k)
    buffer = io.StringIO()
    if comment is not None:
        buffer.write(f"# {comment}\n")
    writer = csv.DictWriter(buffer, fieldnames=keys, extrasaction="ignore", lineterminator="\n")
    writer.writeheader()
    for r in records:
        writer.writerow({k: spreadsheet_safe(json.dumps(finite(v), ensure_ascii=False, default=_jsonable)
                                             if isinstance(v, (list, dict)) else v)
                         for k, v in r.items()})
    return buffer.getvalue()


def records_csv(records: list[dict], prov: dict) -> bytes:
    return csv_text(records, _short(prov)).encode()


# ---------------------------------------------------------------------------------------------
# structures
# ---------------------------------------------------------------------------------------------

def _names_by_smiles(records: list[dict]) -> dict[str, list[str]]:
    """Which study inputs a species belongs to (by canonical SMILES), for titles."""
    roles = {"cation_smiles": "cation", "adduct_smiles": "hydride adduct", "substrate_smiles": "substrate",
             "leaving_group_smiles": "leaving group", "smiles": ""}
    names: dict[str, list[str]] = {}
    for r in records:
        label = r.get("name") or r.get("input") or ""
        for key, role in roles.items():
            smi = r.get(key)
            if isinstance(smi, str) and smi:
                text = f"{label} ({role})" if role else label
                if text and text not in names.setdefault(smi, []):
                    names[smi].append(text)
    return names


def study_species(store) -> list[SpeciesResult]:
    """Every stored species this run used, in a fixed order (level, formula, SMILES)."""
    results = list(store.results(store.touched))
    return sorted(results, key=lambda r: (r.solvent or "", r.formula, r.smiles, r.charge, r.multiplicity, r.key))


def _molecule(result: SpeciesResult):
    """RDKit molecule with the optimised geometry (atom order of the result), or None."""
    from rdkit import Chem
    from rdkit.Geometry import Point3D

    mol = Chem.AddHs(Chem.MolFromSmiles(result.smiles))
    if [a.GetAtomicNum() for a in mol.GetAtoms()] != list(result.numbers):
        return None
    conf = Chem.Conformer(mol.GetNumAtoms())
    for i, (x, y, z) in enumerate(result.positions_angstrom):
        conf.SetAtomPosition(i, Point3D(x, y, z))
    conf.Set3D(True)
    mol.RemoveAllConformers()
    mol.AddConformer(conf, assignId=True)
    return mol


def _species_tags(r: SpeciesResult) -> dict[str, str]:
    k = units.HARTREE_TO_KCAL_MOL
    return {
        "smiles": r.smiles, "charge": str(r.charge), "multiplicity": str(r.multiplicity), "formula": r.formula,
        "level": r.level, "temperature_k": f"{r.temperature_k}",
        "E_hartree": f"{r.E_hartree:.8f}", "H_hartree": f"{r.H_hartree:.8f}", "G_hartree": f"{r.G_hartree:.8f}",
        "zpe_kcal_mol": f"{r.zpe_kcal_mol:.3f}", "H_minus_E_kcal_mol": f"{(r.H_hartree - r.E_hartree) * k:.3f}",
        "G_minus_E_kcal_mol": f"{(r.G_hartree - r.E_hartree) * k:.3f}", "S_J_mol_K": f"{r.S_J_mol_K:.2f}",
        "point_group": r.point_group, "symmetry_number": str(r.symmetry_number),
        "imaginary_frequencies_cm1": " ".join(f"{f:.1f}" for f in r.imaginary_frequencies_cm1) or "none",
        "lowest_frequencies_cm1": " ".join(f"{f:.1f}" for f in r.frequencies_cm1[:6]),
        "partial_charges": " ".join(f"{q:.4f}" for q in r.partial_charges),
        "rearranged": "yes" if r.rearranged else "no",
        "relaxed_smiles": r.relaxed_smiles or "", "bonding_change": r.bonding_change,
        "warnings": " | ".join(r.warnings), "species_key": r.key,
    }


def structures_sdf(results: list[SpeciesResult], names: dict[str, list[str]], prov: dict) -> bytes:
    from rdkit import Chem

    buffer = io.StringIO()
    writer = Chem.SDWriter(buffer)
    for r in results:
        mol = _molecule(r)
        if mol is None:
            continue
        title = one_line("; ".join(names.get(r.smiles, [])) or r.smiles, limit=60)
        mol.SetProp("_Name", f"{title} [{r.level}]")
        for key, value in _species_tags(r).items():
            mol.SetProp(key, value)
        mol.SetProp("study", prov["study"])
        mol.SetProp("workflow_sha256", prov["workflow_sha256"])
        mol.SetProp("versions", " ".join(f"{k}={v}" for k, v in prov["versions"].items()))
        writer.write(mol)
    writer.close()
    return buffer.getvalue().encode()


def _safe(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", text).strip("_") or "species"


def xyz_files(results: list[SpeciesResult], names: dict[str, list[str]], prov: dict) -> dict[str, bytes]:
    """File name → extended-XYZ text for each species."""
    from ase.data import chemical_symbols

    out: dict[str, bytes] = {}
    for r in results:
        sign = f"q{r.charge:+d}" if r.charge else "q0"
        fname = f"{_safe(r.formula)}_{sign}_{_safe(r.solvent or 'gas')}_{r.key[:8]}.xyz"
        fields = {
            "name": one_line("; ".join(names.get(r.smiles, [])) or r.smiles), "smiles": r.smiles, "charge": r.charge,
            "multiplicity": r.multiplicity, "level": r.level, "E_hartree": f"{r.E_hartree:.8f}",
            "G_hartree": f"{r.G_hartree:.8f}", "study": prov["study"], "workflow_sha256": prov["workflow_sha256"],
            **{k: v for k, v in prov["versions"].items()},
        }
        comment = " ".join(f'{k}="{one_line(v).replace(chr(34), chr(39))}"' for k, v in fields.items())
        lines = [str(len(r.numbers)), comment]
        for z, (x, y, zz) in zip(r.numbers, r.positions_angstrom):
            lines.append(f"{chemical_symbols[z]:<2} {x:14.8f} {y:14.8f} {zz:14.8f}")
        out[fname] = ("\n".join(lines) + "\n").encode()
    return out


# ---------------------------------------------------------------------------------------------
# pictures
# ---------------------------------------------------------------------------------------------

def _png(fig) -> bytes:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=110, metadata={"Software": None}, bbox_inches="tight", pad_inches=0.1)
    import matplotlib.pyplot as plt

    plt.close(fig)
    return buffer.getvalue()


def _label(record: dict) -> str:
    label = record.get("name") or record.get("input") or "?"
    if record.get("task") == "ladder" and record.get("leaving_group"):
        label += f" ({record['leaving_group']})"
    elif record.get("task") == "sites" and record.get("site_atom") is not None:
        label += f" (site {record['site_atom']})"
    return label


def ladder_figure(records: list[dict], quantity: str, title: str | None = None):
    """Species sorted by ``quantity`` (kcal/mol; kJ/mol on the top axis), one marker series per solvent.

    Pass the records of one task.  Error bars come from
    ``<quantity stem>_uncertainty_kcal_mol`` when records carry it.  Returns a
    matplotlib figure, or None when no record has the quantity.
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    rows = [r for r in records if isinstance(r.get(quantity), (int, float)) and not r.get("error")]
    if not rows:
        return None
    stem = quantity.removesuffix("_kcal_mol")
    uncertainty = f"{stem}_uncertainty_kcal_mol"
    solvents = list(dict.fromkeys(r.get("solvent", "none") for r in rows))
    values: dict[str, dict[str, tuple[float, float | None]]] = {}
    for r in rows:
        err = r.get(uncertainty)
        values.setdefault(_label(r), {})[r.get("solvent", "none")] = (
            float(r[quantity]), float(err) if isinstance(err, (int, float)) else None)
    first = solvents[0]
    order = sorted(values, key=lambda n: (first not in values[n], values[n].get(first, (0.0, None))[0], n))
    fig, ax = plt.subplots(figsize=(7.0, 1.4 + 0.32 * len(order)))
    markers = "osD^v<>p"
    offsets = [0.0] if len(solvents) == 1 else [(-0.2 + 0.4 * i / (len(solvents) - 1)) for i in range(len(solvents))]
    for i, solvent in enumerate(solvents):
        ys, xs, errs = [], [], []
        for j, name in enumerate(order):
            if solvent in values[name]:
                x, e = values[name][solvent]
                ys.append(j + offsets[i])
                xs.append(x)
                errs.append(e or 0.0)
        label = "gas phase" if solvent == "none" else f"{solvent} (implicit)"
        ax.errorbar(xs, ys, xerr=errs if any(errs) else None, fmt=markers[i % len(markers)], capsize=3,
                    label=label)
    ax.set_yticks(range(len(order)))
    ax.set_yticklabels(order)
    ax.set_ylim(len(order) - 0.5, -0.5)
    ax.set_xlabel(f"{title or stem}, kcal/mol")
    top = ax.secondary_xaxis("top", functions=(units.kcal_to_kj, lambda v: v / units.KCAL_TO_KJ))
    top.set_xlabel("kJ/mol")
    ax.grid(axis="x", alpha=0.3)
    bottom = 0.0
    if len(solvents) > 1 or any(values[n][s][1] for n in values for s in values[n]):
        # below the axes, so no marker is hidden behind it
        columns = min(3, len(solvents))
        rows_in_legend = -(-len(solvents) // columns)
        fig.legend(*ax.get_legend_handles_labels(), loc="lower center", bbox_to_anchor=(0.5, 0.0), ncol=columns,
                   fontsize="small", frameon=False)
        bottom = min(0.5, (0.1 + 0.25 * rows_in_legend) / fig.get_figheight())
    fig.tight_layout(rect=(0.0, bottom, 1.0, 1.0))
    return fig


def ladder_png(records: list[dict], quantity: str, title: str | None = None) -> bytes | None:
    """:func:`ladder_figure` as PNG bytes."""
    fig = ladder_figure(records, quantity, title)
    return None if fig is None else _png(fig)


def heavy_atom_charges(result: SpeciesResult) -> list[float]:
    """Partial charge of each heavy atom with its hydrogens' charges added (atom order of the SMILES)."""
    from rdkit import Chem

    mol = Chem.AddHs(Chem.MolFromSmiles(result.smiles))
    charges = list(result.partial_charges)
    heavy = Chem.MolFromSmiles(result.smiles).GetNumAtoms()
    out = charges[:heavy]
    for atom in mol.GetAtoms():
        if atom.GetAtomicNum() == 1 and atom.GetIdx() >= heavy:
            neighbours = [n.GetIdx() for n in atom.GetNeighbors()]
            if neighbours and neighbours[0] < heavy:
                out[neighbours[0]] += charges[atom.GetIdx()]
    return out


#: |q| (e) that gets the full colour in charge drawings (project choice): own charges of carbenium centres
#: at GFN2-xTB are small (measured, gas: tert-butyl +0.15, 2-propyl +0.10, benzyl ipso +0.06 and para
#: +0.04 against meta 0.00 e; the methyl carbons of tert-butyl −0.15), so 0.2 e saturates the colour
CHARGE_SCALE = 0.2

#: this project's charge palette: teal for negative, white at zero, amber for positive
CHARGE_COLOURS = ("#13706b", "#ffffff", "#d97a00")


def _charge_map():
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("cationcalc-charge", list(CHARGE_COLOURS))


def _charge_colour(q: float) -> tuple[float, float, float]:
    t = max(-1.0, min(1.0, q / CHARGE_SCALE))
    r, g, b, _ = _charge_map()(0.5 + 0.5 * t)
    return (float(r), float(g), float(b))


def drawn_structure(result: SpeciesResult):
    """(heavy-atom molecule to draw, True when it is the relaxed structure), atom order of the result.

    A species that relaxed to other bonds is drawn as it relaxed: connectivity from the optimised
    geometry (single bonds, hydrogens counted on the atom they ended on, + on the unsaturated carbon
    with the largest own charge), so a hydride that moved is drawn where it went.
    """
    from rdkit import Chem

    from cationcalc.chem.bonding import bonds_from_geometry

    mol = Chem.MolFromSmiles(result.smiles)
    if mol is None:
        return None, False
    if not result.rearranged:
        return mol, False
    numbers = list(result.numbers)
    heavy = [i for i, z in enumerate(numbers) if z != 1]
    if heavy != list(range(len(heavy))) or len(result.partial_charges) != len(numbers):
        return mol, False
    rw = Chem.RWMol()
    for i in heavy:
        atom = Chem.Atom(int(numbers[i]))
        atom.SetNoImplicit(True)
        rw.AddAtom(atom)
    hydrogens = [0] * len(heavy)
    neighbours = [0] * len(heavy)
    for a, b in bonds_from_geometry(numbers, result.positions_angstrom):
        if a < len(heavy) and b < len(heavy):
            rw.AddBond(int(a), int(b), Chem.BondType.SINGLE)
            neighbours[a] += 1
            neighbours[b] += 1
        elif min(a, b) < len(heavy):
            hydrogens[min(a, b)] += 1
    for i, n in enumerate(hydrogens):
        rw.GetAtomWithIdx(i).SetNumExplicitHs(n)
    open_carbons = [i for i in heavy if numbers[i] == 6 and neighbours[i] + hydrogens[i] < 4]
    if open_carbons and result.charge > 0:
        centre = max(open_carbons, key=lambda i: result.partial_charges[i])
        rw.GetAtomWithIdx(centre).SetFormalCharge(1)
    out = rw.GetMol()
    out.UpdatePropertyCache(strict=False)
    return out, True


def depiction_png(result: SpeciesResult, size: tuple[int, int] = (320, 240)) -> bytes | None:
    """2-D drawing with each heavy atom shaded and labelled by its own GFN2-xTB partial charge.

    The relaxed structure is drawn when the species relaxed to other bonds (:func:`drawn_structure`).
    """
    from rdkit import Chem
    from rdkit.Chem.Draw import rdMolDraw2D

    if not hasattr(rdMolDraw2D, "MolDraw2DCairo"):
        return None
    parsed = Chem.MolFromSmiles(result.smiles)
    if parsed is None or len(result.partial_charges) != Chem.AddHs(parsed).GetNumAtoms():
        return None
    mol, _ = drawn_structure(result)
    charges = list(result.partial_charges[:mol.GetNumAtoms()])  # each heavy atom's own charge
    for atom, q in zip(mol.GetAtoms(), charges):
        atom.SetProp("atomNote", f"{q:+.2f}")
    drawer = rdMolDraw2D.MolDraw2DCairo(*size)
    options = drawer.drawOptions()
    options.annotationFontScale = 0.7
    options.atomHighlightsAreCircles = True
    options.fillHighlights = True
    options.highlightRadius = 0.35
    colours = {i: _charge_colour(q) for i, q in enumerate(charges)}
    rdMolDraw2D.PrepareAndDrawMolecule(drawer, mol, highlightAtoms=list(colours), highlightAtomColors=colours,
                                       highlightBonds=[], highlightBondColors={})
    drawer.FinishDrawing()
    return drawer.GetDrawingText()


def colour_scale_png() -> bytes:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.colors import Normalize

    fig, ax = plt.subplots(figsize=(4.6, 1.0))
    fig.subplots_adjust(left=0.05, right=0.95, top=0.92, bottom=0.55)
    fig.colorbar(matplotlib.cm.ScalarMappable(norm=Normalize(-CHARGE_SCALE, CHARGE_SCALE), cmap=_charge_map()),
                 cax=ax, orientation="horizontal", label="own partial charge of the atom (e)")
    return _png(fig)


# ---------------------------------------------------------------------------------------------
# report.html
# ---------------------------------------------------------------------------------------------

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
        value = json.dumps(value, ensure_ascii=False, default=_jsonable)
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


TASK_TITLES = {"hia": "hydride-ion affinity", "heterolysis": "heterolysis R–X → R⁺ + X⁻",
               "thermo": "thermochemistry", "ionize": "will it ionize? R–X → R⁺ + X",
               "sites": "where does it ionize? (sites ranked)", "ladder": "which leaving group? (ladder)",
               "shifts": "does the cation rearrange?", "rate": "how fast does it ionize? (rate, half-life)"}


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


def report_html(plan, records: list[dict], results: list[SpeciesResult], prov: dict) -> bytes:
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

    # stability ladder
    ladders = []
    for task in plan.tasks:
        if task.name in LADDER_QUANTITIES:
            quantity, title, hint = LADDER_QUANTITIES[task.name]
            png = ladder_png([r for r in records if r.get("task") == task.name], quantity, title)
            if png is not None:
                ladders.append((task.name, title, hint, png))
    if ladders:
        parts.append("<h2>Stability ladder</h2>")
        for task_name, title, hint, png in ladders:
            parts.append(f"<h3>{esc(title)} ({esc(task_name)})</h3><p>Sorted by the first solvent; {esc(hint)}. "
                         f"Error bars where the records carry an uncertainty.</p>{_img(png, f'ladder of {title}')}")

    # how fast: half-lives (rate task, and ionize/ladder records given a medium)
    timed = [r for r in records if isinstance(r.get("half_life_s"), (int, float)) and not r.get("error")]
    if timed:
        from cationcalc.report.rate_figures import half_life_png

        outside = [r for r in records if r.get("applicability_status") == "outside the SN1 model"]
        parts.append("<h2>How fast: half-lives</h2><p>Half-life of R–X from lg k = s<sub>f</sub>(N<sub>f</sub> + "
                     "E<sub>f</sub>) in each medium at the stated temperature; bars span the lg k uncertainty.</p>"
                     + _img(half_life_png(timed), "half-life chart"))
        if outside:
            parts.append("<p>Outside the SN1 model (no half-life given): " + "; ".join(
                f"{esc(_label(r))} in {esc(str(r.get('medium')))}: {esc(str(r.get('applicability')))}"
                for r in outside) + "</p>")

    # tables: the task's reading view (cationcalc/columns.py); every key is in results.csv/json
    parts.append("<h2>Results</h2><p>One row per substrate × solvent with the answer a chemist reads first; "
                 "± is the error bar of each number (for ΔΔG_ion and differences between sites, the error of "
                 "the difference: see <code>*_uncertainty_basis</code> in results.json). Every other key is in "
                 "results.csv and results.json.</p>")
    for task in plan.tasks:
        rows = [r for r in records if r.get("task") == task.name]
        if not rows:
            continue
        parts.append(f"<h3>{esc(TASK_TITLES.get(task.name, task.name))} ({esc(task.name)})</h3>")
        if task.name == "sites":
            parts.append("<p>Site tiers (this project's): <b>leading</b> when the gap to the best site is within "
                         "the error of that gap or within 1.4 kcal/mol (a factor 10 in K at 298 K), "
                         "<b>competing</b> within 4.1 kcal/mol (a factor 1000), <b>minor</b> beyond.</p>")
        parts.append(task_table_html(task.name, rows))
        cols = _task_columns(task.name, rows)
        parts.append("<details><summary>all numbers of this table (record keys as in results.csv)</summary>"
                     '<div class="wrap"><table class="full"><thead><tr><th>name</th><th>input</th><th>solvent</th>'
                     + "".join(f"<th>{esc(c)}</th>" for c in cols) + "</tr></thead><tbody>")
        for r in rows:
            parts.append("<tr>" + _cell(r.get("name")) + _cell(r.get("input")) + _cell(_solvent(r))
                         + "".join(_cell(r.get(c)) for c in cols) + "</tr>")
        parts.append("</tbody></table></div></details>")

    # cations shaded by charge
    by_key = {(r.smiles, r.solvent): r for r in results}
    cations: list[tuple[str, str | None, str]] = []
    for r in records:
        smi = r.get("cation_smiles")
        solvent = None if r.get("solvent") in (None, "none") else r.get("solvent")
        if isinstance(smi, str) and (smi, solvent) in by_key and (smi, solvent, _label(r)) not in cations:
            if not any(c[0] == smi and c[1] == solvent for c in cations):
                cations.append((smi, solvent, _label(r)))
    pictures = []
    for smi, solvent, label in cations:
        png = depiction_png(by_key[(smi, solvent)])
        if png is None:
            continue
        result = by_key[(smi, solvent)]
        _, relaxed = drawn_structure(result)
        extra = (f"; not a minimum as asked: drawn as it relaxed ({esc(result.relaxed_smiles or 'bridged')})"
                 if relaxed else "")
        centre = _centre_text(result)
        if centre:
            extra += f"; {esc(centre)}"
        pictures.append(f"<figure>{_img(png, f'{label} partial charges')}<figcaption><b>{esc(label)}</b> "
                        f"<code>{esc(smi)}</code>, {esc(result.level)}{extra}</figcaption></figure>")
    if pictures:
        parts.append("<h2>Charge delocalization</h2><p>GFN2-xTB partial charges (e) of each optimised cation, "
                     "drawn on the structure as optimised (a cation that relaxed to other bonds is drawn as it "
                     "relaxed). Each number is the atom's <b>own</b> charge: hydrogen charges are not summed onto "
                     "the heavy atom they are bound to (the caption gives the CH<sub>n</sub> group charge of the "
                     "cationic centre). Colours are this project's: amber for positive, teal for negative, full "
                     f"colour at |q| ≥ {CHARGE_SCALE} e. A charge spread over several atoms shows "
                     f"delocalization.</p>{_img(colour_scale_png(), 'colour scale')}")
        parts.append('<div class="grid">' + "".join(pictures) + "</div>")

    # warnings
    notes = [(r, w) for r in records for w in r.get("warnings", [])]
    parts.append("<h2>Warnings and errors</h2>")
    if notes or errors:
        parts.append("<ul>")
        for r in errors:
            parts.append(f'<li class="error">{esc(_label(r))} — {esc(r["task"])}, {esc(_solvent(r))}: '
                         f"{esc(str(r['error']))}</li>")
        for r, w in notes:
            parts.append(f"<li>{esc(_label(r))} — {esc(r['task'])}, {esc(_solvent(r))}: {esc(str(w))}</li>")
        parts.append("</ul>")
    else:
        parts.append("<p>None.</p>")

    # provenance
    parts.append("<h2>Provenance</h2><table><tbody>")
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
    parts.append("</body></html>\n")
    return "".join(parts).encode()


# ---------------------------------------------------------------------------------------------
# all of it
# ---------------------------------------------------------------------------------------------

def write_outputs(plan, records: list[dict], store) -> list[Path]:
    """Write every requested output of a study; returns the paths (changed or not)."""
    out = plan.output_dir
    out.mkdir(parents=True, exist_ok=True)
    prov = provenance(plan, store)
    results = study_species(store)
    names = _names_by_smiles(records)
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
        files[out / "report.html"] = report_html(plan, records, results, prov)
    for path, data in files.items():
        write_atomic(path, data)
    return list(files)


def read_results(path: str | os.PathLike) -> dict:
    """``results.json`` of a study: ``{"provenance": ..., "records": [...]}``."""
    return json.loads(Path(path).read_text(encoding="utf-8"))


__all__ = ["write_outputs", "ladder_png", "depiction_png", "heavy_atom_charges", "report_html", "provenance", "drawn_structure", "task_table_html",
           "library_versions", "read_results", "write_atomic"]
