"""The whole thermochemistry pipeline against published values and invariants.

SMILES → conformers → GFN2-xTB (tblite) → Hessian → quasi-RRHO, checked end
to end: standard entropies against NIST-JANAF, point groups and symmetry
numbers on the optimised geometries, saddle points and mode following, the
1 atm → 1 mol/L standard state, the conformer ensemble and the ``thermo``
command line.  Each species is computed once per module (cached fixture);
the file runs in well under a minute on one core.
"""

import json
import math

import numpy as np
import pytest

from cationcalc.chem import thermo, units
from cationcalc.chem.bonding import bonds_from_mol, compare_bonding
from cationcalc.cli.main import main
from cationcalc.chem.conformers import ConformerSettings, embed_conformers
from cationcalc.engines import get_engine
from cationcalc.compute.hessian import numerical_hessian
from cationcalc.compute.models import Settings
from cationcalc.compute.optimize import OptimizationResult, optimize
from cationcalc.compute.pipeline import Conformer as _Conformer, _masses, compute_species
from cationcalc.chem.species import Species, carbocation, species
from cationcalc.chem.symmetry import point_group
from conformer_probe import _vibrate

#: JANAF standard state is 1 bar
ONE_BAR = Settings(pressure_pa=100000.0)
R = units.GAS_CONSTANT_J_MOL_K


@pytest.fixture(scope="module")
def computed():
    """compute(species, settings) with a per-module cache: every species once."""
    cache = {}

    def compute(sp, settings=ONE_BAR):
        key = (sp, settings)
        if key not in cache:
            cache[key] = compute_species(sp, settings)
        return cache[key]

    return compute


def _cation(smiles):
    c = carbocation(smiles)
    return Species(c.smiles, 1, 1)


# ----------------------------------------------------------------------------
# 1. standard molar entropies, 298.15 K, 1 bar
# ----------------------------------------------------------------------------

# Chase, M. W. NIST-JANAF Thermochemical Tables, 4th ed., J. Phys. Chem. Ref.
# Data Monograph 9 (1998), S°(298.15 K, 1 bar) in J/mol/K; values from memory
# of those tables, as in /work/shared/reference/standard_entropies.csv.
JANAF_S298 = [
    ("C", 186.25),         # methane, value from memory of Chase 1998 (JANAF)
    ("O", 188.83),         # water, value from memory of Chase 1998 (JANAF)
    ("N", 192.77),         # ammonia, value from memory of Chase 1998 (JANAF)
    ("CC", 229.2),         # ethane, value from memory of Chase 1998 / NIST WebBook
    ("c1ccccc1", 269.2),   # benzene, value from memory of Chase 1998 / NIST WebBook
]


@pytest.mark.parametrize("smiles, janaf", JANAF_S298, ids=[s for s, _ in JANAF_S298])
def test_standard_entropy_matches_janaf(computed, smiles, janaf):
    result = computed(species(smiles))
    assert result.imaginary_frequencies_cm1 == []
    # tolerance 3 J/mol/K: common practice for RRHO vs. tabulated S°, no source
    assert result.S_J_mol_K == pytest.approx(janaf, abs=3.0), f"measured {result.S_J_mol_K:.2f}"


# ----------------------------------------------------------------------------
# 2. point group and rotational symmetry number on the optimised geometry
# ----------------------------------------------------------------------------

# standard rotational symmetry numbers and point groups: common practice, no source
SYMMETRY = [
    ("C", False, 12, "Td"),
    ("c1ccccc1", False, 12, "D6h"),
    ("O", False, 2, "C2v"),
    ("N", False, 3, "C3v"),
    ("CC", False, 6, "D3d"),
    ("C[C+](C)C", True, 3, "C3h"),
    ("C1=CC=C[CH+]C=C1", True, 14, "D7h"),
    ("[C+](c1ccccc1)(c1ccccc1)c1ccccc1", True, 6, "D3"),
]


@pytest.mark.parametrize("smiles, cation, sigma, group", SYMMETRY, ids=[s[0] for s in SYMMETRY])
def test_point_group_and_symmetry_number(computed, smiles, cation, sigma, group):
    sp = _cation(smiles) if cation else species(smiles)
    result = computed(sp)
    assert not result.rearranged
    assert (result.point_group, result.symmetry_number) == (group, sigma)
    # the reported group is the one of the reported geometry
    again = point_group(result.numbers, np.array(result.positions_angstrom))
    assert (again.name, again.symmetry_number) == (group, sigma)


# ----------------------------------------------------------------------------
# 3. saddle points and mode following
# ----------------------------------------------------------------------------

ETHANE_NUMBERS = [6, 6, 1, 1, 1, 1, 1, 1]  # RDKit order for "CC" with hydrogens
GAS = dict(charge=0, multiplicity=1, solvent=None)


@pytest.fixture(scope="module")
def engine():
    return get_engine("tblite")


def _ideal_ethane(twist_deg, cc=1.53, ch=1.09, hcc_deg=111.0):
    """C–C on z; H 2–4 on C0, H 5–7 on C1 twisted by ``twist_deg`` (0: eclipsed D3h, 60: staggered D3d)."""
    angle = math.radians(hcc_deg)
    radial, axial = ch * math.sin(angle), -ch * math.cos(angle)
    positions = [[0.0, 0.0, -cc / 2], [0.0, 0.0, cc / 2]]
    for k in range(3):
        phi = math.radians(120.0 * k)
        positions.append([radial * math.cos(phi), radial * math.sin(phi), -cc / 2 - axial])
    for k in range(3):
        phi = math.radians(120.0 * k + twist_deg)
        positions.append([radial * math.cos(phi), radial * math.sin(phi), cc / 2 + axial])
    return np.array(positions)


def _twist(positions, degrees):
    """Rotate the methyl on C1 (atoms 5–7) about the C–C axis."""
    axis = positions[1] - positions[0]
    axis /= np.linalg.norm(axis)
    k = np.array([[0, -axis[2], axis[1]], [axis[2], 0, -axis[0]], [-axis[1], axis[0], 0]])
    t = math.radians(degrees)
    rotation = np.eye(3) + math.sin(t) * k + (1 - math.cos(t)) * k @ k
    out = positions.copy()
    out[5:] = (positions[5:] - positions[1]) @ rotation.T + positions[1]
    return out


def _frequencies(engine, positions):
    hessian = numerical_hessian(ETHANE_NUMBERS, positions, engine, **GAS)
    return thermo.vibrational_analysis(hessian, _masses(ETHANE_NUMBERS), positions)


def test_eclipsed_ethane_is_a_first_order_saddle(engine, computed):
    start = _ideal_ethane(0.0)
    assert point_group(ETHANE_NUMBERS, start, 0.01).name == "D3h"
    opt = optimize(ETHANE_NUMBERS, start, engine, **GAS)
    assert opt.converged
    # symmetric start, symmetric forces: the optimisation stays eclipsed
    assert point_group(ETHANE_NUMBERS, opt.positions, 0.01).name == "D3h"
    vib = _frequencies(engine, opt.positions)
    imaginary = vib.frequencies_cm1[vib.frequencies_cm1 < 0]
    assert len(imaginary) == 1
    assert imaginary[0] < -100.0  # a real torsional saddle, not numerical noise (measured ≈ −293 cm⁻¹)
    # the imaginary mode is the torsion: the methyls turn in opposite senses about C–C, carbons at rest
    mode = vib.modes[0]
    axis = opt.positions[1] - opt.positions[0]
    axis /= np.linalg.norm(axis)
    spin = [sum(np.cross(opt.positions[i] - opt.positions[c], mode[i]) @ axis for i in hs)
            for c, hs in ((0, (2, 3, 4)), (1, (5, 6, 7)))]
    assert spin[0] * spin[1] < 0 and min(abs(s) for s in spin) > 0.3
    assert np.abs(mode[:2]).max() < 0.05
    # and it lies above the staggered minimum from the pipeline
    staggered = computed(species("CC"))
    assert opt.energy_ev / units.HARTREE_EV > staggered.E_hartree


def _small_imaginary_twist(engine, minimum):
    """A twist of the staggered minimum that shows one small (< 50i cm⁻¹) imaginary mode."""
    for degrees in (31.25, 31.5, 31.75, 32.0):
        positions = _twist(minimum, degrees)
        lowest = _frequencies(engine, positions).frequencies_cm1[0]
        if -50.0 < lowest < 0.0:
            return degrees
    pytest.fail("no twist of staggered ethane between 31.25° and 32° gives a small imaginary mode")


@pytest.mark.parametrize("kind", ["small", "large"])
def test_mode_following_cleans_up_imaginary_mode(engine, computed, kind):
    minimum_result = computed(species("CC"))
    minimum = np.array(minimum_result.positions_angstrom)
    degrees = _small_imaginary_twist(engine, minimum) if kind == "small" else 60.0
    start = _twist(minimum, degrees)
    start_freqs = _frequencies(engine, start).frequencies_cm1
    assert np.count_nonzero(start_freqs < 0) == 1
    assert (-50.0 < start_freqs[0] < 0.0) if kind == "small" else (start_freqs[0] < -100.0)

    sp = species("CC")
    mol, _ = embed_conformers(sp.smiles)
    assert [a.GetAtomicNum() for a in mol.GetAtoms()] == ETHANE_NUMBERS
    reference_bonds = bonds_from_mol(mol)
    energy = engine.compute(ETHANE_NUMBERS, start, **GAS).energy_ev
    opt = OptimizationResult(start.copy(), energy, 0.0, 0, True, np.zeros(8), None)
    conf = _Conformer(opt, compare_bonding(reference_bonds, ETHANE_NUMBERS, start, 0), start.copy(), energy)
    warnings, counts = [], {"conformer_screen": 0, "optimization": 0, "hessian": 0}
    _vibrate(conf, ETHANE_NUMBERS, sp, Settings(), engine, reference_bonds, warnings, counts)

    assert counts["optimization"] > 0  # the mode was followed
    assert np.all(conf.frequencies_cm1 > 0)
    assert conf.thermo.n_imaginary_ignored == 0
    assert warnings == [] and conf.note == ""
    assert conf.group.name == "D3d" and conf.thermo.symmetry_number == 6
    assert conf.energy_ev < energy
    # back at the pipeline's staggered minimum (within 0.01 kcal/mol)
    assert abs(conf.energy_ev / units.HARTREE_EV - minimum_result.E_hartree) * units.HARTREE_TO_KCAL_MOL < 0.01


@pytest.mark.parametrize("smiles, cation", [("CC", False), ("CCC", False), ("C[C+](C)C", True)])
def test_pipeline_minima_have_no_imaginary_modes(computed, smiles, cation):
    result = computed(_cation(smiles) if cation else species(smiles))
    assert result.imaginary_frequencies_cm1 == []
    assert all(f > 0 for f in result.frequencies_cm1)
    assert not any("saddle" in c.note for c in result.conformers)
    assert not any("imaginary" in w for w in result.warnings)


# ----------------------------------------------------------------------------
# 4. 1 atm → 1 mol/L standard state
# ----------------------------------------------------------------------------

def test_standard_state_correction(computed):
    solution = computed(species("C"), Settings(solvent="water"))
    gas = computed(species("C"), Settings())
    # RT ln(24.46) = 1.894 kcal/mol at 298.15 K (24.46 L/mol = RT/1 atm): common practice, no source
    assert solution.standard_state_correction_kcal_mol == pytest.approx(1.894, abs=1e-3)
    assert gas.standard_state_correction_kcal_mol == 0.0
    # it is included in G (solution), not in S
    s_from_h_minus_g = ((solution.H_hartree - solution.G_hartree) * units.HARTREE_TO_KCAL_MOL
                        + solution.standard_state_correction_kcal_mol) / 298.15 / units.J_TO_KCAL
    assert solution.S_J_mol_K == pytest.approx(s_from_h_minus_g, rel=1e-9)


# ----------------------------------------------------------------------------
# 5. conformer ensemble (n-butane)
# ----------------------------------------------------------------------------

def test_butane_ensemble(computed):
    settings = Settings()
    result = computed(species("CCCC"), settings)
    records = result.conformers
    assert len(records) >= 2
    assert all(r.converged and not r.bonding_changed for r in records)
    in_window = [r for r in records if r.gibbs_kcal_mol is not None]
    assert len(in_window) >= 2
    assert sum(r.weight for r in records) == pytest.approx(1.0, abs=1e-6)
    # records are sorted by electronic energy, relative to the lowest
    assert records[0].relative_energy_kcal_mol == 0.0
    assert [r.relative_energy_kcal_mol for r in records] == sorted(r.relative_energy_kcal_mol for r in records)
    # Gibbs energies are relative to the lowest G; weights are Boltzmann factors of them
    assert min(r.gibbs_kcal_mol for r in in_window) == 0.0
    rt = R * settings.temperature_k * units.J_TO_KCAL
    factors = np.array([r.mirror_images * math.exp(-r.gibbs_kcal_mol / rt) for r in in_window])
    assert [r.weight for r in in_window] == pytest.approx(list(factors / factors.sum()), rel=1e-9)
    # anti (C2h) is achiral; gauche (C2) is chiral and its mirror image gauche- (never sampled with this
    # seed) is counted: the gauche weight is that of two conformers (common practice, no source)
    assert [r.mirror_images for r in in_window] == [1, 2]
    assert in_window[1].weight > 0.3
    # gas phase: S = (H − G)/T of the ensemble (conformer mixing entropy included)
    assert result.S_J_mol_K == pytest.approx(
        (result.H_hartree - result.G_hartree) * units.HARTREE_TO_KCAL_MOL / settings.temperature_k / units.J_TO_KCAL,
        rel=1e-9)

    # the best single conformer alone: an energy window of 0 keeps only it
    assert records[0].gibbs_kcal_mol == 0.0  # here the lowest-E conformer is also the lowest-G one
    single = computed(species("CCCC"), Settings(conformers=ConformerSettings(window_kcal_mol=0.0)))
    assert single.E_hartree == pytest.approx(result.E_hartree, abs=1e-9)
    # ensemble G not above the best conformer's G; exactly G_best + RT ln w_best
    assert result.G_hartree <= single.G_hartree
    delta_kcal = (result.G_hartree - single.G_hartree) * units.HARTREE_TO_KCAL_MOL
    assert delta_kcal == pytest.approx(rt * math.log(records[0].weight), abs=1e-5)
    assert delta_kcal >= -rt * math.log(sum(r.mirror_images for r in in_window)) - 1e-9


# ----------------------------------------------------------------------------
# 6. the `cationcalc thermo` command line
# ----------------------------------------------------------------------------

THERMO_KEYS = {"smiles", "E_hartree", "zpe_kcal_mol", "H_kcal_mol", "S_J_mol_K", "G_kcal_mol",
               "symmetry_number", "imaginary_frequencies_cm1"}
CLI_INPUTS = ["C", "[Cl-]", "C[C+](C)C"]


def _run_cli(capsys, inputs):
    # --workers 1: no process pool inside the test run
    code = main(["thermo", *inputs, "--json", "--workers", "1"])
    return code, json.loads(capsys.readouterr().out)


def test_cli_thermo_json(capsys):
    code, records = _run_cli(capsys, CLI_INPUTS)
    assert code == 0
    assert [r["input"] for r in records] == CLI_INPUTS
    for r in records:
        assert THERMO_KEYS <= r.keys()
        assert "error" not in r
        assert isinstance(r["imaginary_frequencies_cm1"], list)
    assert [r["symmetry_number"] for r in records] == [12, 1, 3]


def test_cli_thermo_bad_smiles(capsys):
    code, records = _run_cli(capsys, [*CLI_INPUTS, "xx"])
    assert code == 1
    assert len(records) == 4
    bad = records[-1]
    assert bad["input"] == "xx" and bad["error"]
    assert all("error" not in r and THERMO_KEYS <= r.keys() for r in records[:-1])


# ----------------------------------------------------------------------------
# 7. temperature dependence
# ----------------------------------------------------------------------------

def test_methane_entropy_at_500_k(computed):
    hot = computed(species("C"), Settings(temperature_k=500.0, pressure_pa=100000.0))
    room = computed(species("C"), ONE_BAR)
    assert hot.S_J_mol_K > room.S_J_mol_K  # S rises with T: common practice, no source
    # S°(500 K, 1 bar) = 207.0 J/mol/K: value from memory of Chase, NIST-JANAF Tables,
    # 4th ed., J. Phys. Chem. Ref. Data Monograph 9 (1998), methane table
    assert hot.S_J_mol_K == pytest.approx(207.0, abs=3.0), f"measured {hot.S_J_mol_K:.2f}"
