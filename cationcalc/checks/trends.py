"""Trend checks: orders a chemist reads at a glance, each pass/fail with its numbers and the experimental source.

Hyperconjugation along methyl > ethyl > 2-propyl > tert-butyl, resonance
against the same substitution, benzyl against tert-butyl and 2-propyl,
aromatic stabilization among isomers, σ cations, the vinylic 2-propenyl
cation, and the σ⁺ series (in the protocol's medium and in the run's).  A check is ``None`` (n/a) when a number it needs
was not computed.

Example
-------
>>> from cationcalc.checks.trends import _order
>>> _order([260.0, 250.0, 240.0]), _order([260.0, None])
(True, None)
"""

from __future__ import annotations

from cationcalc.checks.reference_sets import (BROWN_OKAMOTO, HOULE_1979, IPEPICO_2010, ISOMERS, KEISTER_1993,
                                              LIAS_1988, SIGMA_PLUS_MEDIUM, TORMA_2019, TREND_CATIONS)
from cationcalc.chem.species import carbocation


def _trend(name: str, expectation: str, computed: str, experiment: str, source: str, passed: bool | None,
           note: str = "", status: str = "read") -> dict:
    """One row of the trend table; ``status`` says how the experimental value was obtained (read/derived/recalled)."""
    return {"check": name, "expectation": expectation, "computed": computed, "experiment": experiment,
            "source": source, "status": status, "passed": passed, "note": note}


def _hia_of(hia: dict[str, dict], smiles: str) -> float | None:
    rec = hia.get(carbocation(smiles).smiles)
    if rec is None or rec.get("error"):
        return None
    return rec["hia_kcal_mol"]


def _order(values: list[float | None]) -> bool | None:
    if any(v is None for v in values):
        return None
    return all(a > b for a, b in zip(values, values[1:]))


def _fmt(v: float | None, digits: int = 1) -> str:
    return "n/a" if v is None else f"{v:.{digits}f}"


def trend_checks(hia: dict[str, dict], isomer_h: dict[str, dict[str, float | None]], correlations: dict[str, dict],
                 gas_table: dict[str, float]) -> list[dict]:
    """The trend table: each check pass/fail with the computed numbers and the experimental order's source.

    ``hia``: canonical cation SMILES → hia record; ``isomer_h``: formula →
    name → enthalpy relative to the aromatic ion (kcal/mol); ``correlations``:
    evaluated σ⁺ sets; ``gas_table``: experimental HIA by table name.
    """
    h = {name: _hia_of(hia, smi) for name, smi in TREND_CATIONS.items()}
    return (_substitution_trends(h, gas_table) + _benzyl_trends(h, gas_table) + _aromatic_trends(isomer_h, gas_table)
            + _unsaturated_cation_trends(h, gas_table) + _sigma_plus_trends(correlations))


def _substitution_trends(h: dict[str, float | None], gas_table: dict[str, float]) -> list[dict]:
    """Hyperconjugation along the alkyl series, and resonance against the same substitution."""
    series = [h["methyl"], h["ethyl"], h["2-propyl"], h["tert-butyl"]]
    out = [_trend(
        "hyperconjugation", "HIA methyl > ethyl > 2-propyl > tert-butyl",
        " > ".join(_fmt(v) for v in series),
        f"{gas_table['methyl']} > {gas_table['ethyl']} > {gas_table['2-propyl']} > 236.7",
        f"methyl, ethyl: {HOULE_1979}; 2-propyl: {IPEPICO_2010}; {KEISTER_1993}", _order(series))]
    for name, partner in (("1-phenylethyl", "2-propyl"), ("1-methylallyl", "2-propyl"), ("cumyl", "tert-butyl")):
        a, b = h[name], h[partner]
        out.append(_trend(
            f"resonance: {name} vs {partner}", f"HIA {name} < {partner} (same substitution, π-conjugated)",
            f"{_fmt(a)} vs {_fmt(b)} (Δ {_fmt(None if a is None or b is None else a - b)})",
            "order only", "common practice, no source", None if a is None or b is None else a < b))
    return out


def _benzyl_trends(h: dict[str, float | None], gas_table: dict[str, float]) -> list[dict]:
    """The primary benzyl cation against tert-butyl and 2-propyl, as the gas-phase measurements order them."""
    a, b = h["benzyl"], h["tert-butyl"]
    out = [_trend(
        "benzyl (primary) vs tert-butyl", "HIA benzyl > tert-butyl (published gas-phase values)",
        f"{_fmt(a)} vs {_fmt(b)}", f"{gas_table['benzyl (0 K, onset)']} (0 K) vs 236.7", f"{TORMA_2019}; {KEISTER_1993}",
        None if a is None or b is None else a > b,
        "textbooks rank benzylic with tertiary; the gas-phase measurements put the primary benzyl cation "
        "about 4 kcal/mol less stable than tert-butyl, and the check follows the measurements")]
    a, b = h["benzyl"], h["2-propyl"]
    exp_gap = gas_table["2-propyl"] - gas_table["benzyl (0 K, onset)"]
    out.append(_trend(
        "benzyl vs 2-propyl", "HIA benzyl < 2-propyl",
        f"{_fmt(a)} vs {_fmt(b)} (gap {_fmt(None if a is None or b is None else b - a)})",
        f"{gas_table['benzyl (0 K, onset)']} vs {gas_table['2-propyl']} (gap {exp_gap:.1f})",
        f"{TORMA_2019}; {IPEPICO_2010}", None if a is None or b is None else a < b,
        "GFN2-xTB compresses this gap (benzyl is overestimated more than 2-propyl)"))
    return out


def _aromatic_trends(isomer_h: dict[str, dict[str, float | None]], gas_table: dict[str, float]) -> list[dict]:
    """The aromatic ion lowest in enthalpy among its isomers (C7H7+, C3H3+)."""
    out = []
    for formula, group in ISOMERS.items():
        names = list(group)
        rel = isomer_h.get(formula, {})
        others = [rel.get(n) for n in names[1:]]
        passed = None if any(v is None for v in others) else all(v > 0 for v in others)
        if formula == "C7H7+":
            # ΔfH(benzyl+) − ΔfH(tropylium+) from the two 0 K onsets (HIA0) and ΔfH of toluene (12.0) and
            # cycloheptatriene (43.9 kcal/mol), values from memory of the NIST/Pedley compilations
            exp_gap = (gas_table["benzyl (0 K, onset)"] - gas_table["tropylium (0 K, onset)"]) + (12.0 - 43.9)
            exp_text = f"benzyl +{exp_gap:.1f}"
            src, status = TORMA_2019, "derived"
        else:
            exp_text = "propargyl ≈ +25"
            src, status = LIAS_1988, "recalled"
        out.append(_trend(
            f"aromatic stabilization {formula}", f"{names[0]} lowest in enthalpy among {', '.join(names)}",
            ", ".join(f"{n} {_fmt(rel.get(n)) if n != names[0] else '0'}" for n in names) + " kcal/mol",
            exp_text, src, passed, status=status))
    return out


def _unsaturated_cation_trends(h: dict[str, float | None], gas_table: dict[str, float]) -> list[dict]:
    """σ cations (vinyl, phenyl) against 2-propyl, and the vinylic 2-propenyl cation against allyl."""
    out = []
    for name in ("vinyl", "phenyl"):
        a, b = h[name], h["2-propyl"]
        out.append(_trend(
            f"σ cation: {name} vs 2-propyl", f"HIA {name} > 2-propyl",
            f"{_fmt(a)} vs {_fmt(b)}", {"vinyl": "≈289", "phenyl": "≈287"}[name] + f" vs {gas_table['2-propyl']}",
            f"{LIAS_1988}; 2-propyl: {IPEPICO_2010}",
            None if a is None or b is None else a > b, status="recalled"))
    a, b = h["2-propenyl"], h["allyl"]
    out.append(_trend(
        "2-propenyl (vinylic) vs allyl", "HIA 2-propenyl > allyl",
        f"{_fmt(a)} vs {_fmt(b)} (Δ {_fmt(None if a is None or b is None else a - b)})",
        f"≈261 vs {gas_table['allyl']}", f"2-propenyl: {LIAS_1988}; allyl: J. Phys. Chem. A 2009, 113, 10710",
        None if a is None or b is None else a > b,
        "a known failure of GFN2-xTB, which overstabilizes vinyl cations", status="recalled (2-propenyl)"))
    return out


def _sigma_plus_trends(correlations: dict[str, dict]) -> list[dict]:
    """The σ⁺ series: HIA rises with σ⁺ with r ≥ 0.95, for each evaluated series (protocol medium, then the run's)."""
    out = []
    solution = f"ALPB({SIGMA_PLUS_MEDIUM})"
    for key, label in (("sigma_benzyl_solution", f"para-benzyl, {solution}"),
                       ("sigma_cumyl_solution", f"para-cumyl, {solution}"),
                       ("sigma_benzyl", "para-benzyl"), ("sigma_cumyl", "para-cumyl")):
        c = correlations.get(key)
        if c is None:
            continue
        ok = None if c.get("r") is None else bool(c["sign_ok"] and c["r"] >= 0.95)
        out.append(_trend(
            f"σ⁺ series: {label}", "HIA rises with σ⁺ (slope > 0, ρ⁺ < 0), r ≥ 0.95",
            (f"n {c['n']}, slope {_fmt(c['slope'])} kcal/mol/σ⁺, ρ⁺ {_fmt(c.get('rho_plus'))}, r {_fmt(c['r'], 3)}"
             if c.get("r") is not None else "n/a"),
            "σ⁺ constants", BROWN_OKAMOTO, ok))
    return out


__all__ = ["trend_checks"]
