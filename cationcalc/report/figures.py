"""Study figures as PNG bytes: the stability ladder, charge depictions with their colour scale, half-lives.

* :func:`ladder_png`: species sorted by a task's headline quantity (kcal/mol,
  kJ/mol on the top axis), one marker series per solvent, error bars where
  the records carry an uncertainty;
* :func:`depiction_png`: a 2-D drawing of a cation, each heavy atom shaded
  and labelled by its own GFN2-xTB partial charge (a cation that relaxed to
  other bonds drawn as it relaxed, :func:`drawn_structure`), and
  :func:`colour_scale_png`, the scale of those colours;
* :func:`half_life_png`: how long each substrate (or leaving group) lasts in
  each medium, on a log time axis: one row per substrate and leaving group,
  one marker per medium; the error bar is the half-life range from the
  record's lg k uncertainty; dotted lines mark a minute, an hour, a day and
  a year.  Records outside the SN1 model have no half-life.

Every PNG is drawn without a timestamp, so an unchanged study gives the same bytes.

Example
-------
>>> from cationcalc.report.figures import half_life_png, ladder_png
>>> records = [{"task": "hia", "name": "tert-butyl", "solvent": "none", "hia_kcal_mol": 236.7},
...            {"task": "hia", "name": "2-propyl", "solvent": "none", "hia_kcal_mol": 251.9,
...             "hia_uncertainty_kcal_mol": 2.0}]
>>> ladder_png(records, "hia_kcal_mol")[:8] == b"\\x89PNG\\r\\n\\x1a\\n"
True
>>> png = half_life_png([{"name": "demo", "leaving_group": "chloride", "medium": "80E20W", "half_life_s": 400.0,
...                       "lg_k_ion_uncertainty": 0.1}])
>>> png[:4] == b"\\x89PNG"
True
"""

from __future__ import annotations

import io
from typing import TYPE_CHECKING

from cationcalc.chem import units
from cationcalc.compute.models import SpeciesResult

if TYPE_CHECKING:  # pragma: no cover
    import matplotlib.figure
    from rdkit import Chem

#: the quantity a stability ladder is drawn for, per task (title, how to read it)
LADDER_QUANTITIES = {
    "hia": ("hia_kcal_mol", "hydride-ion affinity (HIA)", "higher HIA: less stable cation"),
    "ionize": ("dG_ion_kcal_mol", "ΔG of ionization", "higher ΔG: harder to ionize"),
    "sites": ("dG_ion_kcal_mol", "ΔG of ionization per site", "higher ΔG: harder to ionize"),
    "ladder": ("dG_ion_kcal_mol", "ΔG of ionization per leaving group", "higher ΔG: harder to ionize"),
    "heterolysis": ("dG_het_kcal_mol", "ΔG of heterolysis R–X → R⁺ + X⁻", "higher ΔG: harder to ionize"),
}


def png_bytes(fig: "matplotlib.figure.Figure") -> bytes:
    """A matplotlib figure as PNG bytes (no timestamp), the figure closed."""
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=110, metadata={"Software": None}, bbox_inches="tight", pad_inches=0.1)
    import matplotlib.pyplot as plt

    plt.close(fig)
    return buffer.getvalue()


def record_label(record: dict) -> str:
    """How a record is named in figures and lists: its name, with the leaving group or site where it has one."""
    label = record.get("name") or record.get("input") or "?"
    if record.get("task") == "ladder" and record.get("leaving_group"):
        label += f" ({record['leaving_group']})"
    elif record.get("task") == "sites" and record.get("site_atom") is not None:
        label += f" (site {record['site_atom']})"
    return label


def ladder_figure(records: list[dict], quantity: str, title: str | None = None) -> "matplotlib.figure.Figure | None":
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
        values.setdefault(record_label(r), {})[r.get("solvent", "none")] = (
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
    return None if fig is None else png_bytes(fig)


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


def drawn_structure(result: SpeciesResult) -> "tuple[Chem.Mol | None, bool]":
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
    return png_bytes(fig)


# ---------------------------------------------------------------------------------------------
# half-lives
# ---------------------------------------------------------------------------------------------

#: reference durations drawn on the chart
MARKS = ((units.SECONDS_PER_MINUTE, "1 min"), (units.SECONDS_PER_HOUR, "1 h"), (units.SECONDS_PER_DAY, "1 day"),
         (units.SECONDS_PER_YEAR, "1 year"))


def _half_life_label(record: dict) -> str:
    label = record.get("name") or record.get("input") or "?"
    if record.get("leaving_group"):
        label += f" ({record['leaving_group']})"
    return label


def half_life_figure(records: list[dict]) -> "matplotlib.figure.Figure | None":
    """Half-lives of R–X per medium on a log time axis; the matplotlib figure, or None when no record has one."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    rows = [r for r in records if isinstance(r.get("half_life_s"), (int, float)) and not r.get("error")]
    if not rows:
        return None
    media = list(dict.fromkeys(r.get("medium") for r in rows))
    labels = list(dict.fromkeys(_half_life_label(r) for r in sorted(rows, key=lambda r: r["half_life_s"])))
    fig, ax = plt.subplots(figsize=(7.2, 1.6 + 0.34 * len(labels)))
    markers = "osD^v<>p"
    offsets = [0.0] if len(media) == 1 else [(-0.2 + 0.4 * i / (len(media) - 1)) for i in range(len(media))]
    for i, m in enumerate(media):
        ys, xs, lows, highs = [], [], [], []
        for r in rows:
            if r.get("medium") != m:
                continue
            t = float(r["half_life_s"])
            u = float(r.get("lg_k_ion_uncertainty") or 0.0)
            ys.append(labels.index(_half_life_label(r)) + offsets[i])
            xs.append(t)
            lows.append(t - t / 10 ** u)
            highs.append(t * 10 ** u - t)
        ax.errorbar(xs, ys, xerr=[lows, highs], fmt=markers[i % len(markers)], capsize=3, label=str(m))
    ax.set_xscale("log")
    for seconds, text in MARKS:
        ax.axvline(seconds, color="#999999", ls=":", lw=0.8)
        ax.text(seconds, -0.6, text, fontsize=7, ha="center", va="bottom", color="#555555")
    ax.set_yticks(range(len(labels)))
    ax.set_yticklabels(labels)
    ax.set_ylim(len(labels) - 0.5, -0.9)
    ax.set_xlabel("half-life of R–X, s (log scale; bars: ± the lg k uncertainty)")
    ax.grid(axis="x", alpha=0.2, which="major")
    handles, names = ax.get_legend_handles_labels()
    fig.legend(handles, [f"medium {n}" for n in names], loc="lower center", ncol=min(4, len(media)),
               fontsize="small", frameon=False)
    fig.tight_layout(rect=(0.0, min(0.4, 0.35 / fig.get_figheight()), 1.0, 1.0))
    return fig


def half_life_png(records: list[dict]) -> bytes | None:
    """:func:`half_life_figure` as PNG bytes, or None when no record has a half-life."""
    fig = half_life_figure(records)
    return None if fig is None else png_bytes(fig)


__all__ = ["LADDER_QUANTITIES", "record_label", "png_bytes", "ladder_figure", "ladder_png", "heavy_atom_charges",
           "CHARGE_SCALE", "CHARGE_COLOURS", "drawn_structure", "depiction_png", "colour_scale_png", "MARKS",
           "half_life_figure", "half_life_png"]
