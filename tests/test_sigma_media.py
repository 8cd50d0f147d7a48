"""σ⁺ in solution: the σ⁺ check runs in the protocol's medium, ALPB(acetone), by default.

Source of σ⁺: Brown and Okamoto, J. Am. Chem. Soc. 80, 4979 (1958), values from memory
(cationcalc/data/sigma_plus.csv, 9 para substituents); σ⁺ was defined by the solvolysis of cumyl chlorides
in 90 % aqueous acetone, for which ALPB(acetone) stands (reference_sets.SIGMA_PLUS_MEDIUM).

Thresholds are the figures measured with benchmarks/sigma_plus_media.py (GFN2-xTB/tblite, default settings,
benchmarks/results/sigma_plus_media.json): r against σ⁺, gas / ALPB(acetone) / ALPB(water), benzyl 0.9469 /
0.9534 / 0.9527, cumyl 0.9538 / 0.9571 / 0.9529.  A second run from an empty store gave every HIA to the
0.01 kcal/mol of the records and every r to 1e-6 (benchmarks/results/sigma_plus_media_rerun.json), so the
run-to-run noise is nil; the tolerance 0.002 on r is what a 0.3 kcal/mol change of one HIA can do (0.1 kcal/mol
on any one of the nine moves r by at most 0.0006), the size of a BLAS or thread-count change, well below the
0.0065 by which acetone beats the gas phase for the benzyl cations.
"""

import pytest

from cationcalc.checks.literature import run_checks
from cationcalc.checks.reference_sets import SIGMA_PLUS_MEDIUM, reference_sets
from cationcalc.compute.models import Settings

TOLERANCE_R = 0.002  # see the module docstring

#: three σ⁺ sets computed from scratch (about 1.5 min on 2 cores): behind the slow marker to keep the default
#: run inside its budget; the same figures are in benchmarks/results/check_full.md
pytestmark = pytest.mark.slow


@pytest.fixture(scope="module")
def report():
    # the default (gas-phase) run: the protocol sets are computed in their own medium all the same
    return run_checks(Settings(), sets=["sigma_benzyl_solution", "sigma_cumyl_solution", "sigma_benzyl"], workers=2)


def test_protocol_sets_are_in_acetone_and_the_run_medium_sets_stay():
    sets = reference_sets()
    assert SIGMA_PLUS_MEDIUM == "acetone"
    assert sets["sigma_benzyl_solution"].medium == sets["sigma_cumyl_solution"].medium == "acetone"
    assert sets["sigma_benzyl"].medium == sets["sigma_cumyl"].medium == "run"
    for key in ("sigma_benzyl_solution", "sigma_cumyl_solution"):
        assert sets[key].entries and set(sets[key].quick) == {e.name for e in sets[key].entries}
        assert all("Brown" in e.source and "Okamoto" in e.source for e in sets[key].entries)


def test_sigma_plus_benzyl_in_acetone(report):
    # Brown–Okamoto 1958 σ⁺: donors stabilise the benzyl cation, the HIA rises with σ⁺ (ρ⁺ < 0)
    s = report["sets"]["sigma_benzyl_solution"]
    assert "ALPB(acetone)" in s["level"]
    assert s["n"] == 9 and s["sign_ok"] and s["rho_plus"] < 0
    assert s["r"] >= 0.9534 - TOLERANCE_R  # measured 0.9534


def test_sigma_plus_cumyl_in_acetone(report):
    # Brown–Okamoto 1958: σ⁺ was defined by these cumyl cations' chlorides
    s = report["sets"]["sigma_cumyl_solution"]
    assert "ALPB(acetone)" in s["level"]
    assert s["n"] == 9 and s["sign_ok"] and s["rho_plus"] < 0
    assert s["r"] >= 0.9571 - TOLERANCE_R  # measured 0.9571


def test_acetone_reproduces_the_benzyl_series_better_than_the_gas_phase(report):
    # the protocol's choice: Brown–Okamoto 1958 σ⁺, r in ALPB(acetone) 0.9534 against 0.9469 in the gas phase
    solution, gas = report["sets"]["sigma_benzyl_solution"], report["sets"]["sigma_benzyl"]
    assert "ALPB" not in gas["level"]
    assert solution["r"] > gas["r"]
    # solvation attenuates the substituent effect: a smaller slope than in the gas phase (21.2 against 23.6)
    assert 0 < solution["slope"] < gas["slope"]


def test_trend_rows_of_the_protocol_sets(report):
    trends = {t["check"]: t for t in report["trends"]}
    for label in ("para-benzyl, ALPB(acetone)", "para-cumyl, ALPB(acetone)"):
        row = trends[f"σ⁺ series: {label}"]
        assert row["passed"] is True, row["computed"]  # r ≥ 0.95 with the right sign (measured 0.953, 0.957)
        assert "Okamoto" in row["source"]


def test_fluorine_stays_on_the_wrong_side_in_acetone(report):
    # σ⁺(4-F) = −0.07 (Brown–Okamoto 1958): 4-F slightly stabilises the cation, so its HIA should lie below
    # the parent's.  GFN2-xTB puts it 5.1 kcal/mol above in ALPB(acetone) (4.8 in the gas phase): the medium
    # does not repair it (measured; a fix shows up here as a failure to be re-measured)
    hia = {e["name"]: e["calc"] for e in report["sets"]["sigma_benzyl_solution"]["entries"]}
    assert hia["4-F-benzyl"] - hia["H-benzyl"] > 0
