"""Linear calibration of computed hydride-ion affinities against gas-phase experiment.

GFN2-xTB with isodesmic hydride exchange against tert-butyl is systematically
off (it overestimates the HIA of every cation in the bundled gas-phase set,
most for small and π-delocalised cations).  A straight line

    HIA_exp ≈ a · HIA_calc + b

fitted per level of theory (method and solvent model, e.g. ``GFN2-xTB (gas)``)
removes most of that bias.  Its honest error is the leave-one-out (LOO) error:
each cation is predicted by the line fitted to all the *others*.

Stored calibrations live in two bundled CSV files (CSV so that they ship
with the existing ``data/*.csv`` package data):

* ``data/calibration.csv`` — one row per level: id, method, engine,
  solvent_model, solvent, package version, fit date, data set, n, a, b,
  LOO MAE/RMSE/max, raw MAE/RMSE/mean error;
* ``data/calibration_residuals.csv`` — one row per cation and calibration:
  class group, experimental and computed HIA, raw residual (calc − exp), LOO
  residual (LOO prediction − exp), and the source of the experimental value.

Residuals are grouped by cation class (:func:`class_group`: alkyl,
allylic/benzylic, aromatic, heteroatom-stabilized, other) so users see where
the method is weak; :mod:`cationcalc.trust.uncertainty` reads them to put an error
bar on every number.  Signs: a residual is *computed minus experiment*.

Example
-------
>>> import numpy as np
>>> from cationcalc.trust.calibration import class_group, fit_linear, loo_residuals
>>> x = np.array([200.0, 220.0, 240.0, 260.0]); y = 0.5 * x + 100.0
>>> fit = fit_linear(x, y); round(fit.a, 6), round(fit.b, 6)
(0.5, 100.0)
>>> bool(np.abs(loo_residuals(x, y)).max() < 1e-9)
True
>>> class_group("benzylic (primary)"), class_group("acylium"), class_group("tertiary")
('allylic/benzylic', 'heteroatom-stabilized', 'alkyl')
"""

from __future__ import annotations

import csv
import datetime as _dt
import math
from dataclasses import dataclass, field
from functools import lru_cache
from importlib import resources
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import ArrayLike

from cationcalc.about import __version__

if TYPE_CHECKING:  # pragma: no cover
    from cationcalc.compute.models import Settings

#: the groups per-class residuals are reported for, in display order
CLASS_GROUPS = ("alkyl", "allylic/benzylic", "aromatic", "heteroatom-stabilized", "other")
#: a class group needs at least this many calibration cations for its own error bar
MIN_GROUP_N = 3

CALIBRATION_COLUMNS = ["id", "method", "engine", "solvent_model", "solvent", "level", "package_version",
                       "fit_date", "dataset", "n", "a", "b", "loo_mae_kcal_mol", "loo_rmse_kcal_mol",
                       "loo_max_kcal_mol", "raw_mae_kcal_mol", "raw_rmse_kcal_mol", "raw_mean_error_kcal_mol",
                       "class_loo_mae_kcal_mol", "notes"]
RESIDUAL_COLUMNS = ["calibration_id", "name", "cation_smiles", "cation_class", "class_group", "hia_exp_kcal_mol",
                    "hia_calc_kcal_mol", "raw_residual_kcal_mol", "loo_residual_kcal_mol", "class_loo_residual_kcal_mol",
                    "status", "source", "verification"]


def class_group(cls: str, cation_smiles: str | None = None) -> str:
    """The broad group of a :func:`~cationcalc.chem.ionization.cation_class` string.

    methyl/primary/secondary/tertiary → alkyl; benzylic/allylic/propargylic
    → allylic/benzylic; aromatic → aromatic; heteroatom-stabilized and
    acylium → heteroatom-stabilized; everything else (vinylic, aryl,
    cyclopropylmethyl) → other.  With ``cation_smiles``, a halogen on the
    cationic carbon (CF₃⁺, CCl₃⁺) also counts as heteroatom-stabilized (π
    donation from the halogen lone pairs), which the class string, built for
    leaving-group chemistry, calls plain methyl/tertiary.
    """
    text = (cls or "").lower()
    if text.startswith(("heteroatom", "acylium")):
        return "heteroatom-stabilized"
    if cation_smiles and _halogen_on_centre(cation_smiles):
        return "heteroatom-stabilized"
    if text.startswith(("benzylic", "allylic", "propargylic")):
        return "allylic/benzylic"
    if text.startswith("aromatic"):
        return "aromatic"
    if text in ("methyl", "primary", "secondary", "tertiary"):
        return "alkyl"
    return "other"


def _halogen_on_centre(cation_smiles: str) -> bool:
    from cationcalc.chem.species import carbocation

    try:
        cation = carbocation(cation_smiles)
    except ValueError:
        return False
    from rdkit import Chem

    mol = Chem.MolFromSmiles(cation.smiles)
    return any(n.GetSymbol() in ("F", "Cl", "Br", "I") for n in mol.GetAtomWithIdx(cation.centre).GetNeighbors())


def cation_group(cation_smiles: str) -> tuple[str, str]:
    """(class string, class group) of a carbocation given by SMILES."""
    from cationcalc.chem.ionization import cation_class
    from cationcalc.chem.species import carbocation

    cls = cation_class(carbocation(cation_smiles))
    return cls, class_group(cls, cation_smiles)


# ---------------------------------------------------------------- statistics

@dataclass(frozen=True)
class LinearFit:
    """y ≈ a·x + b by least squares, with Pearson r."""

    a: float
    b: float
    n: int
    r: float

    def predict(self, x: ArrayLike) -> np.ndarray:
        return self.a * np.asarray(x, dtype=float) + self.b


def fit_linear(x: ArrayLike, y: ArrayLike) -> LinearFit:
    """Ordinary least squares y = a·x + b (needs at least two distinct x)."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    if x.size < 2 or np.ptp(x) == 0:
        raise ValueError("a straight-line fit needs at least two distinct x values")
    xm, ym = float(x.mean()), float(y.mean())
    sxx = float(((x - xm) ** 2).sum())
    sxy = float(((x - xm) * (y - ym)).sum())
    syy = float(((y - ym) ** 2).sum())
    a = sxy / sxx
    r = sxy / math.sqrt(sxx * syy) if syy > 0 else 1.0
    return LinearFit(float(a), float(ym - a * xm), int(x.size), float(r))


def _leave_one_out(x: ArrayLike, y: ArrayLike, predict) -> np.ndarray:
    """Point i predicted by ``predict(i, keep)``, a model refitted on the other points only (mask ``keep``)."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    if x.size < 3:
        raise ValueError("leave-one-out needs at least three points")
    out = np.empty_like(y)
    for i in range(x.size):
        out[i] = predict(i, np.arange(x.size) != i)
    return out


def loo_predictions(x: ArrayLike, y: ArrayLike) -> np.ndarray:
    """Leave-one-out predictions: point i predicted by the line fitted without it (explicit refits)."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    return _leave_one_out(x, y, lambda i, keep: fit_linear(x[keep], y[keep]).predict(x[i]))


def class_offsets(x: ArrayLike, y: ArrayLike, groups: list[str], line: LinearFit,
                  min_n: int = MIN_GROUP_N) -> dict[str, float]:
    """Per class group, the shrunk mean of y − line(x): an empirical-Bayes offset added to the line's prediction.

    Only groups with at least ``min_n`` points get an offset.  Each group's
    mean residual m_g is shrunk toward zero by τ²/(τ² + σ²/n_g), where σ² is
    the pooled within-group variance of the residuals and τ² the variance of
    the group means beyond what σ²/n_g explains (method of moments; no
    offsets when τ² ≤ 0, i.e. the groups do not differ more than chance).

    >>> fit = LinearFit(1.0, 0.0, 8, 1.0)
    >>> x = np.zeros(8); y = np.array([5.0, 5.5, 4.5, 5.0, -5.0, -4.5, -5.5, -5.0])
    >>> {g: round(v, 2) for g, v in class_offsets(x, y, ["a"] * 4 + ["b"] * 4, fit).items()}
    {'a': 5.0, 'b': -5.0}
    """
    res = np.asarray(y, dtype=float) - line.predict(x)
    members = {g: res[[i for i, h in enumerate(groups) if h == g]] for g in dict.fromkeys(groups)}
    own = {g: e for g, e in members.items() if e.size >= min_n}
    if len(own) < 2:
        return {}
    within = float(np.mean([e.var(ddof=1) for e in own.values()]))
    means = np.array([e.mean() for e in own.values()])
    tau2 = float(means.var(ddof=1)) - float(np.mean([within / e.size for e in own.values()]))
    if tau2 <= 0:
        return {}
    return {g: float(tau2 / (tau2 + within / e.size) * e.mean()) for g, e in own.items()}


def loo_class_predictions(x: ArrayLike, y: ArrayLike, groups: list[str]) -> np.ndarray:
    """Leave-one-out predictions of the line plus shrunk class offsets (both refitted without the point)."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)

    def predict(i: int, keep: np.ndarray) -> float:
        kept_groups = [g for j, g in enumerate(groups) if j != i]
        line = fit_linear(x[keep], y[keep])
        return line.predict(x[i]) + class_offsets(x[keep], y[keep], kept_groups, line).get(groups[i], 0.0)

    return _leave_one_out(x, y, predict)


def loo_residuals(x: ArrayLike, y: ArrayLike) -> np.ndarray:
    """LOO prediction minus observed y, point by point."""
    return loo_predictions(x, y) - np.asarray(y, dtype=float)


def error_statistics(errors: ArrayLike) -> dict:
    """n, MAE, RMSE, max |error| and mean (signed) error of an array of errors."""
    e = np.asarray(errors, dtype=float)
    if e.size == 0:
        return {"n": 0, "mae": None, "rmse": None, "max": None, "mean": None}
    return {"n": int(e.size), "mae": float(np.abs(e).mean()), "rmse": float(np.sqrt((e ** 2).mean())),
            "max": float(np.abs(e).max()), "mean": float(e.mean())}


# ---------------------------------------------------------------- calibrations

@dataclass(frozen=True)
class Residual:
    """One cation of a calibration set."""

    name: str
    cation_smiles: str
    cation_class: str
    class_group: str
    hia_exp_kcal_mol: float
    hia_calc_kcal_mol: float
    raw_residual_kcal_mol: float
    loo_residual_kcal_mol: float
    status: str = ""
    source: str = ""
    #: leave-one-out residual of the line plus shrunk class offsets (NaN where not computed)
    class_loo_residual_kcal_mol: float = float("nan")
    #: how the reference value was checked (from the reference table)
    verification: str = ""


@dataclass(frozen=True)
class Calibration:
    """A stored linear correction for one level of theory."""

    id: str
    method: str
    engine: str
    solvent_model: str
    solvent: str
    level: str
    package_version: str
    fit_date: str
    dataset: str
    n: int
    a: float
    b: float
    loo_mae_kcal_mol: float
    loo_rmse_kcal_mol: float
    loo_max_kcal_mol: float
    raw_mae_kcal_mol: float
    raw_rmse_kcal_mol: float
    raw_mean_error_kcal_mol: float
    #: leave-one-out MAE of the line plus shrunk class offsets (NaN where not computed)
    class_loo_mae_kcal_mol: float = float("nan")
    notes: str = ""
    residuals: tuple[Residual, ...] = field(default=(), compare=False)

    @property
    def by_class(self) -> bool:
        """True when the class offsets lowered the leave-one-out error, so they are applied."""
        return bool(self.class_loo_mae_kcal_mol < self.loo_mae_kcal_mol)

    def class_offset(self, group: str | None) -> float:
        """The shrunk offset (kcal/mol) of a class group; 0 without class offsets or for a group without one."""
        if not self.by_class or group is None:
            return 0.0
        return self.offsets().get(group, 0.0)

    def offsets(self) -> dict[str, float]:
        """Shrunk class offsets fitted on the stored residuals (empty when the set gives none)."""
        calc = [r.hia_calc_kcal_mol for r in self.residuals]
        exp = [r.hia_exp_kcal_mol for r in self.residuals]
        return class_offsets(calc, exp, [r.class_group for r in self.residuals],
                             LinearFit(self.a, self.b, self.n, float("nan"))) if self.residuals else {}

    def apply(self, hia_calc_kcal_mol: float, group: str | None = None) -> float:
        """The calibrated HIA (kcal/mol) of a computed one: the line, plus the class offset where one applies."""
        return self.a * float(hia_calc_kcal_mol) + self.b + self.class_offset(group)

    def describe(self, group: str | None = None) -> str:
        """The correction applied to a cation of ``group``, in words."""
        line = f"HIA_exp ≈ {self.a:.4f}·HIA_calc {self.b:+.2f} (n {self.n}, LOO RMSE {self.loo_rmse_kcal_mol:.1f} kcal/mol)"
        offset = self.class_offset(group)
        if offset:
            return (f"{line} {offset:+.2f} kcal/mol class offset for {group} (shrunk; LOO MAE with class offsets "
                    f"{self.class_loo_mae_kcal_mol:.1f} against {self.loo_mae_kcal_mol:.1f} for the line alone)")
        return line + (f"; no class offset for {group or 'this cation'}" if self.by_class else "")

    def group_residuals(self, group: str | None, kind: str = "raw") -> np.ndarray:
        """Residuals (``kind`` 'raw' or 'loo') of one class group, or of all cations when group is None.

        'loo' is the leave-one-out residual of the correction applied: the line plus class offsets when
        :attr:`by_class`, the line alone otherwise.
        """
        attr = ("raw_residual_kcal_mol" if kind == "raw" else
                "class_loo_residual_kcal_mol" if self.by_class else "loo_residual_kcal_mol")
        return np.array([getattr(r, attr) for r in self.residuals if group is None or r.class_group == group])

    def group_statistics(self, kind: str = "raw") -> dict[str, dict]:
        """Per class group: n, MAE, RMSE, max and mean of the residuals (kcal/mol)."""
        out = {}
        for group in CLASS_GROUPS:
            e = self.group_residuals(group, kind)
            if e.size:
                out[group] = error_statistics(e)
        return out

    def error_model(self, group: str | None, kind: str = "raw") -> tuple[float, float, int, bool]:
        """(mean, population variance, n, own) of the residuals used for an error bar.

        The class group's own residuals when it has at least :data:`MIN_GROUP_N`
        cations (own=True), otherwise those of the whole set.
        """
        e = self.group_residuals(group, kind) if group else np.array([])
        own = e.size >= MIN_GROUP_N
        if not own:
            e = self.group_residuals(None, kind)
        return float(e.mean()), float(e.var()), int(e.size), own


def calibration_id(level: str, version: str = __version__) -> str:
    """e.g. 'GFN2-xTB (gas)@0.1.0'."""
    return f"{level}@{version}"


def fit_calibration(rows: list[dict], *, method: str, engine: str, solvent_model: str | None, solvent: str | None,
                    level: str, dataset: str, notes: str = "", fit_date: str | None = None) -> Calibration:
    """Fit HIA_exp ≈ a·HIA_calc + b to rows with keys name, cation_smiles, cation_class, class_group,
    hia_exp_kcal_mol, hia_calc_kcal_mol (and optionally status, source, verification)."""
    if len(rows) < 3:
        raise ValueError(f"a calibration needs at least three cations, got {len(rows)}")
    calc = np.array([float(r["hia_calc_kcal_mol"]) for r in rows])
    exp = np.array([float(r["hia_exp_kcal_mol"]) for r in rows])
    fit = fit_linear(calc, exp)
    loo = loo_predictions(calc, exp) - exp
    class_loo = loo_class_predictions(calc, exp, [r["class_group"] for r in rows]) - exp
    raw = calc - exp
    raw_stats, loo_stats = error_statistics(raw), error_statistics(loo)
    residuals = tuple(Residual(r["name"], r["cation_smiles"], r.get("cation_class", ""), r["class_group"],
                               float(r["hia_exp_kcal_mol"]), float(r["hia_calc_kcal_mol"]), float(raw[i]),
                               float(loo[i]), r.get("status", ""), r.get("source", ""), float(class_loo[i]),
                               r.get("verification", ""))
                      for i, r in enumerate(rows))
    return Calibration(id=calibration_id(level), method=method, engine=engine, solvent_model=solvent_model or "none",
                       solvent=solvent or "none", level=level, package_version=__version__,
                       fit_date=fit_date or _dt.date.today().isoformat(), dataset=dataset, n=len(rows),
                       a=fit.a, b=fit.b, loo_mae_kcal_mol=loo_stats["mae"], loo_rmse_kcal_mol=loo_stats["rmse"],
                       loo_max_kcal_mol=loo_stats["max"], raw_mae_kcal_mol=raw_stats["mae"],
                       raw_rmse_kcal_mol=raw_stats["rmse"], raw_mean_error_kcal_mol=raw_stats["mean"],
                       class_loo_mae_kcal_mol=error_statistics(class_loo)["mae"], notes=notes,
                       residuals=residuals)


def _fmt(value) -> str:
    return f"{value:.6g}" if isinstance(value, float) else str(value)


def write_calibrations(calibrations: list[Calibration], folder: str | Path) -> list[Path]:
    """Write (or replace, by id) calibrations into folder/calibration.csv and calibration_residuals.csv."""
    folder = Path(folder)
    existing = {c.id: c for c in _read_calibrations(folder)}
    for cal in calibrations:
        existing[cal.id] = cal
    ordered = sorted(existing.values(), key=lambda c: c.id)
    main_path, res_path = folder / "calibration.csv", folder / "calibration_residuals.csv"
    with main_path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=CALIBRATION_COLUMNS)
        writer.writeheader()
        for cal in ordered:
            writer.writerow({k: _fmt(getattr(cal, k)) for k in CALIBRATION_COLUMNS})
    with res_path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=RESIDUAL_COLUMNS)
        writer.writeheader()
        for cal in ordered:
            for r in cal.residuals:
                row = {k: _fmt(getattr(r, k)) for k in RESIDUAL_COLUMNS if k != "calibration_id"}
                writer.writerow({"calibration_id": cal.id, **row})
    return [main_path, res_path]


_FLOATS = {"a", "b", "loo_mae_kcal_mol", "loo_rmse_kcal_mol", "loo_max_kcal_mol", "raw_mae_kcal_mol",
           "raw_rmse_kcal_mol", "raw_mean_error_kcal_mol", "class_loo_mae_kcal_mol"}


def _float(text: str | None) -> float:
    return float(text) if text not in (None, "") else float("nan")


def _parse(rows: list[dict], residual_rows: list[dict]) -> list[Calibration]:
    out = []
    for row in rows:
        residuals = tuple(
            Residual(r["name"], r["cation_smiles"], r["cation_class"], r["class_group"], float(r["hia_exp_kcal_mol"]),
                     float(r["hia_calc_kcal_mol"]), float(r["raw_residual_kcal_mol"]),
                     float(r["loo_residual_kcal_mol"]), r.get("status", ""), r.get("source", ""),
                     _float(r.get("class_loo_residual_kcal_mol")), r.get("verification", ""))
            for r in residual_rows if r["calibration_id"] == row["id"])
        values = {k: (_float(v) if k in _FLOATS else int(v) if k == "n" else v) for k, v in row.items()}
        out.append(Calibration(**values, residuals=residuals))
    return out


def _read_calibrations(folder: Path) -> list[Calibration]:
    main_path, res_path = folder / "calibration.csv", folder / "calibration_residuals.csv"
    if not main_path.exists():
        return []
    with main_path.open(encoding="utf-8", newline="") as h1, res_path.open(encoding="utf-8", newline="") as h2:
        return _parse(list(csv.DictReader(h1)), list(csv.DictReader(h2)))


@lru_cache(maxsize=1)
def stored_calibrations() -> tuple[Calibration, ...]:
    """The calibrations bundled with the package (empty when none is stored)."""
    folder = resources.files("cationcalc") / "data"
    main_path = folder / "calibration.csv"
    if not main_path.is_file():
        return ()
    with main_path.open(encoding="utf-8", newline="") as h1, \
            (folder / "calibration_residuals.csv").open(encoding="utf-8", newline="") as h2:
        return tuple(_parse(list(csv.DictReader(h1)), list(csv.DictReader(h2))))


def calibration_for(settings: Settings) -> Calibration | None:
    """The stored calibration for the level of ``settings`` (method and solvent model + solvent), or None.

    The engine is not part of the key: tblite and xtb-python implement the
    same GFN2-xTB Hamiltonian; only the solvent model name differs (ALPB/GBSA).
    """
    for cal in stored_calibrations():
        if cal.level == settings.level and cal.method == settings.method:
            return cal
    return None


def gas_calibration(method: str = "GFN2-xTB") -> Calibration | None:
    """The stored gas-phase calibration of a method (the fallback error model in solution)."""
    for cal in stored_calibrations():
        if cal.method == method and cal.solvent_model == "none":
            return cal
    return None


__all__ = ["CLASS_GROUPS", "MIN_GROUP_N", "LinearFit", "Residual", "Calibration", "class_group", "cation_group",
           "fit_linear", "loo_predictions", "loo_residuals", "class_offsets", "loo_class_predictions", "error_statistics", "calibration_id",
           "fit_calibration", "write_calibrations", "stored_calibrations", "calibration_for", "gas_calibration"]
