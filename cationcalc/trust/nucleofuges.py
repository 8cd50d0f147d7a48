"""Nucleofugality N_f and s_f of a leaving group in a medium: published, or estimated by a validated route.

Published pairs come from ``data/nucleofugality.csv`` (each row with its
source and the E_f range its fit covered).  A medium without a published N_f
can be reached for a leaving group whose published N_f follow the
Grunwald–Winstein ionizing power Y_Cl (``data/ionizing_power.csv``): the line
N_f = a + b·Y_Cl is fitted over the media that have both, its leave-one-out
error becomes the estimate's error, s_f is the mean over the same media, and
the record is flagged as estimated.  Anything else is refused with the list of
pairs that exist.

Example
-------
>>> from cationcalc.trust.nucleofuges import nucleofugality
>>> from cationcalc.chem.media import medium
>>> nf = nucleofugality("chloride", medium("80E20W"))
>>> nf.N_f, nf.s_f, nf.estimated
(3.24, 0.99, False)
>>> water = nucleofugality("Cl", medium("water"))
>>> water.estimated, round(water.N_f, 1)
(True, 6.7)
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from cationcalc.trust.calibration import error_statistics, fit_linear, loo_residuals
from cationcalc.chem.leaving_groups import leaving_group
from cationcalc.chem.media import Medium, media
from cationcalc.chem.reference import load_table
from cationcalc.chem.species import InputError

#: fewest media with both a published N_f and a Y_Cl for the ionizing-power route
MIN_MEDIA_FOR_ESTIMATE = 5


@dataclass(frozen=True)
class Nucleofugality:
    """N_f and s_f of one leaving group in one medium, with where they come from."""

    leaving_group: str  #: library name (chloride, bromide, …)
    medium: Medium
    N_f: float
    s_f: float
    E_f_low: float | None  #: E_f range of the fit behind N_f (None: not known / open)
    E_f_high: float | None
    source: str
    status: str
    estimated: bool
    uncertainty_lg: float  #: error this N_f adds to lg k (0 for a published value; the equation error is separate)
    route: str  #: 'published' or how it was estimated

    def range_text(self) -> str:
        low = "?" if self.E_f_low is None else f"{self.E_f_low:+.2f}"
        high = "above 0" if self.E_f_high is None else f"{self.E_f_high:+.2f}"
        return f"{low} … {high}"

    def covers(self, E_f: float) -> bool | None:
        """True when E_f lies in the range the N_f was fitted over (None: range unknown)."""
        if self.E_f_low is None:
            return None
        return E_f >= self.E_f_low - 1e-9 and (self.E_f_high is None or E_f <= self.E_f_high + 1e-9)


def _range(text: str) -> tuple[float | None, float | None]:
    low, _, high = (text or "").partition("..")
    return (float(low) if low.strip() else None,
            None if not high.strip() or high.strip().startswith(">") else float(high))


@lru_cache(maxsize=1)
def _published() -> tuple[dict, ...]:
    rows = []
    for row in load_table("nucleofugality"):
        rows.append({**row, "group": leaving_group(row["leaving_group"]).name})
    return tuple(rows)


def _by_key(m: Medium, group: str) -> dict | None:
    if not m.nucleofugality_key:
        return None
    return next((r for r in _published() if r["group"] == group and r["medium"] == m.nucleofugality_key), None)


@dataclass(frozen=True)
class IonizingPowerRoute:
    """N_f = a + b·Y_Cl for one leaving group, fitted over the media that have both."""

    leaving_group: str
    a: float
    b: float
    r: float
    media: tuple[str, ...]
    loo_rmse: float
    loo_max: float
    mean_s_f: float


@lru_cache(maxsize=None)
def ionizing_power_route(group: str) -> IonizingPowerRoute | None:
    """The validated Y_Cl route for a leaving group (None with fewer than five media to fit)."""
    y_cl = {r["medium"]: float(r["Y_Cl"]) for r in load_table("ionizing_power") if r["Y_Cl"]}
    points = []
    for m in media():
        row = _by_key(m, group)
        if row is not None and m.ionizing_power_key in y_cl:
            points.append((m.code, y_cl[m.ionizing_power_key], float(row["N_f"]), float(row["s_f"])))
    if len(points) < MIN_MEDIA_FOR_ESTIMATE:
        return None
    x = np.array([p[1] for p in points])
    y = np.array([p[2] for p in points])
    fit = fit_linear(x, y)
    stats = error_statistics(loo_residuals(x, y))
    return IonizingPowerRoute(group, fit.b, fit.a, fit.r, tuple(p[0] for p in points), stats["rmse"], stats["max"],
                              float(np.mean([p[3] for p in points])))


def _y_cl(m: Medium) -> tuple[float, dict] | None:
    row = next((r for r in load_table("ionizing_power") if r["medium"] == m.ionizing_power_key and r["Y_Cl"]), None)
    return (float(row["Y_Cl"]), row) if row else None


def nucleofugality(group_name: str, m: Medium) -> Nucleofugality:
    """N_f/s_f of a leaving group (library name or alias) in a medium; InputError listing what exists."""
    group = leaving_group(group_name).name
    row = _by_key(m, group)
    if row is not None:
        low, high = _range(row["E_f_range_of_fit"])
        return Nucleofugality(group, m, float(row["N_f"]), float(row["s_f"]), low, high, row["source"],
                              row["status"], False, 0.0, "published")
    route = ionizing_power_route(group)
    y = _y_cl(m)
    if route is not None and y is not None:
        y_cl, y_row = y
        n_f = route.a + route.b * y_cl
        ranges = [_range(r["E_f_range_of_fit"]) for r in _published() if r["group"] == group]
        low = min(r[0] for r in ranges if r[0] is not None)
        high = None if any(r[1] is None for r in ranges) else max(r[1] for r in ranges)
        fitted = [y for y, _ in (_y_cl(x) for x in media() if x.code in route.media)]
        outside = (f"; Y_Cl outside the fitted {min(fitted):+.2f} … {max(fitted):+.2f}: extrapolated"
                   if not min(fitted) <= y_cl <= max(fitted) else "")
        how = (f"estimated: N_f = {route.a:.2f} + {route.b:.3f}·Y_Cl (fit over {len(route.media)} media, "
               f"r {route.r:.3f}, LOO RMSE {route.loo_rmse:.2f}), Y_Cl = {y_cl:+.2f}{outside}; "
               f"s_f = {route.mean_s_f:.2f} (mean of the same media)")
        source = (f"{how}. N_f: {_published()[0]['source']}; Y_Cl: {y_row['source']}")
        status = f"estimated (Y_Cl {y_row['status']})"
        return Nucleofugality(group, m, n_f, route.mean_s_f, low, high, source, status, True,
                              route.mean_s_f * route.loo_rmse, how)
    raise InputError(f"no N_f for {group} in {m.label()}; pairs available: {describe_available()}")


def available() -> dict[str, list[str]]:
    """Leaving group → medium codes with a published or estimable N_f."""
    out: dict[str, list[str]] = {}
    for group in dict.fromkeys(r["group"] for r in _published()):
        route = ionizing_power_route(group)
        codes = [m.code for m in media() if _by_key(m, group) is not None
                 or (route is not None and _y_cl(m) is not None)]
        out[group] = codes
    return out


def describe_available() -> str:
    """One line: each group with its media, published ones marked *."""
    def mark(group: str, code: str) -> str:
        return code + ("*" if _by_key(next(m for m in media() if m.code == code), group) else "")

    listing = "; ".join(f"{group}: {', '.join(mark(group, c) for c in codes)}" for group, codes in available().items())
    return f"{listing} (* published; the others estimated from Y_Cl)"


__all__ = ["Nucleofugality", "nucleofugality", "ionizing_power_route", "IonizingPowerRoute", "available",
           "describe_available", "MIN_MEDIA_FOR_ESTIMATE"]
