"""The numerical Hessian in column blocks: the same matrix whether the blocks ran in one thread or in several
on borrowed cores, every gradient counted, cores given back, errors of helper threads raised."""

from __future__ import annotations

import threading

import numpy as np
import pytest

from cationcalc.chem.conformers import embed_conformers
from cationcalc.compute import cores
from cationcalc.compute.hessian import DEFAULT_STEP_ANGSTROM, column_blocks, numerical_hessian
from cationcalc.engines import get_engine
from cationcalc.engines.base import EngineCounters, EngineResult, SCFConvergenceError

WATER = dict(charge=0, multiplicity=1, solvent="water")


class Lender:
    """An in-process lender with ``free`` idle cores; remembers every loan."""

    def __init__(self, free: int):
        self.free, self.loans, self.lock = free, [], threading.Lock()

    def borrow(self, wanted: int) -> int:
        with self.lock:
            taken = max(0, min(wanted, self.free))
            self.free -= taken
            self.loans.append(taken)
            return taken

    def give_back(self, count: int) -> None:
        with self.lock:
            self.free += count


@pytest.fixture
def lender():
    def install(free: int) -> Lender:
        lent = Lender(free)
        cores.install_lender(lent)
        return lent

    yield install
    cores.install_lender(None)


def _pentane():
    mol, geometries = embed_conformers("CCCCC")
    return [a.GetAtomicNum() for a in mol.GetAtoms()], geometries[0]


def _chain(numbers, positions, engine, columns) -> dict[int, np.ndarray]:
    """Central-difference columns computed one after another with ``engine`` (the plain algorithm)."""
    out = {}
    for k in columns:
        atom, axis = divmod(k, 3)
        forces = []
        for sign in (1.0, -1.0):
            pos = positions.copy()
            pos[atom, axis] += sign * DEFAULT_STEP_ANGSTROM
            forces.append(engine.compute(numbers, pos, **WATER).forces_ev_per_angstrom.reshape(-1))
        out[k] = -(forces[0] - forces[1]) / (2 * DEFAULT_STEP_ANGSTROM)
    return out


def test_blocks_cover_every_column_once_in_order():
    for n in (3, 39, 47, 48, 95, 96, 138, 600):
        blocks = column_blocks(n)
        assert [k for b in blocks for k in b] == list(range(n))
        assert len(blocks) in (1, 2, 4) and (len(blocks) == 1 or min(len(b) for b in blocks) >= 24)


def test_small_molecule_hessian_is_the_plain_chain():
    mol, geometries = embed_conformers("CC(C)(C)Cl")  # 14 atoms, 42 columns: one block
    numbers, positions = [a.GetAtomicNum() for a in mol.GetAtoms()], geometries[0]
    assert len(column_blocks(3 * len(numbers))) == 1
    plain = _chain(numbers, positions, get_engine(), range(3 * len(numbers)))
    h = np.column_stack([plain[k] for k in range(3 * len(numbers))])
    assert np.array_equal(numerical_hessian(numbers, positions, get_engine(), **WATER), 0.5 * (h + h.T))


def test_blocks_start_fresh_chains_and_helpers_change_no_digit(lender):
    numbers, positions = _pentane()  # 17 atoms, 51 columns: two blocks
    blocks = column_blocks(3 * len(numbers))
    assert len(blocks) == 2
    first = _chain(numbers, positions, get_engine(), blocks[0])
    second = _chain(numbers, positions, get_engine(), blocks[1])  # a fresh engine: a chain of its own
    h = np.column_stack([{**first, **second}[k] for k in range(3 * len(numbers))])
    serial_engine = get_engine()
    serial = numerical_hessian(numbers, positions, serial_engine, **WATER)
    assert np.array_equal(serial, 0.5 * (h + h.T))

    lent = lender(3)
    threaded_engine = get_engine()
    threaded = numerical_hessian(numbers, positions, threaded_engine, **WATER)
    assert lent.loans and sum(lent.loans) == 1  # one helper for the one block the caller does not take
    assert lent.free == 3  # given back
    assert np.array_equal(threaded, serial)
    # every gradient counted in the caller's engine, the helper's too
    assert serial_engine.counters.calls == threaded_engine.counters.calls == 6 * len(numbers)
    assert threaded_engine.counters.seconds > 0


def test_no_idle_core_means_no_thread(lender):
    numbers, positions = _pentane()
    lent = lender(0)
    before = threading.active_count()
    engine = get_engine()
    numerical_hessian(numbers, positions, engine, **WATER)
    assert threading.active_count() == before and lent.free == 0
    assert engine.counters.calls == 6 * len(numbers)


class FailingEngine:
    """A harmonic toy engine named like tblite (so helpers are used) that fails at one geometry."""

    name, method, solvent_model = "tblite", "toy", "none"

    def __init__(self, fail_on_column: int):
        self.counters = EngineCounters()
        self.fail_on_column = fail_on_column

    def reset(self) -> None:
        pass

    def compute(self, numbers, positions_angstrom, *, charge, multiplicity, solvent):
        self.counters.calls += 1
        pos = np.asarray(positions_angstrom, dtype=float)
        moved = np.flatnonzero(np.abs(pos - np.zeros_like(pos)).reshape(-1) > 1e-12)
        if self.fail_on_column in moved:
            raise SCFConvergenceError("toy SCF failure")
        return EngineResult(float((pos ** 2).sum()), -2 * pos, np.zeros(len(pos)))


def test_an_error_in_a_helper_block_is_raised_and_the_core_given_back(lender):
    lent = lender(1)
    n_atoms = 16  # 48 columns: two blocks; column 40 is in the second, computed by the helper or the caller
    with pytest.raises(SCFConvergenceError, match="toy SCF failure"):
        numerical_hessian([6] * n_atoms, np.zeros((n_atoms, 3)), FailingEngine(fail_on_column=40), **WATER)
    assert lent.free == 1


def test_toy_engine_hessian_is_exact_and_counted(lender):
    lender(1)
    engine = FailingEngine(fail_on_column=-1)
    h = numerical_hessian([6] * 16, np.zeros((16, 3)), engine, **WATER)
    assert np.allclose(h, 2 * np.eye(48))  # E = Σ x², H = 2·1
    assert engine.counters.calls == 6 * 16


def test_forward_differences_cost_3n_plus_1_and_agree_with_central_on_a_quadratic(lender):
    # E = Σ x² has no third derivative, so forward differences are exact there too; they cost 3N + 1
    # gradients against 6N (the forces at the undisplaced structure once)
    lender(0)
    engine = FailingEngine(fail_on_column=-1)
    h = numerical_hessian([6] * 16, np.zeros((16, 3)), engine, scheme="forward", **WATER)
    assert np.allclose(h, 2 * np.eye(48))
    assert engine.counters.calls == 3 * 16 + 1
    with pytest.raises(ValueError, match="central, forward"):
        numerical_hessian([6] * 16, np.zeros((16, 3)), engine, scheme="backward", **WATER)


def test_forward_difference_frequencies_of_pentane_are_close_to_central():
    # GFN2-xTB pentane at its optimised structure: the forward-difference error is of order h (0.005 Å), so the
    # frequencies move by a few cm-1 at most (common practice, no source: about 1 % of a C-H stretch)
    from ase.data import atomic_masses

    from cationcalc.chem import thermo
    from cationcalc.compute.optimize import optimize

    numbers, positions = _pentane()
    engine = get_engine("tblite")
    opt = optimize(numbers, positions, engine, charge=0, multiplicity=1, solvent="water", fmax=0.005)
    masses = np.array([atomic_masses[z] for z in numbers])
    freqs = {scheme: thermo.vibrational_analysis(
        numerical_hessian(numbers, opt.positions, engine, scheme=scheme, **WATER), masses, opt.positions
    ).frequencies_cm1 for scheme in ("central", "forward")}
    assert np.max(np.abs(freqs["forward"] - freqs["central"])) < 30.0
    assert np.mean(np.abs(freqs["forward"] - freqs["central"])) < 5.0
