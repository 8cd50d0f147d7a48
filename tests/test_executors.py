"""The process pool lends the cores of finished workers to the species still running: same numbers as serial."""

from __future__ import annotations

import multiprocessing

from cationcalc.chem.species import species
from cationcalc.chem.conformers import ConformerSettings
from cationcalc.compute.models import Profile, Settings
from cationcalc.execution.executors import _compute_in_pool, compute_many, compute_one
from cationcalc.execution.idle_cores import IdleCores


def _borrow_in_child(idle: IdleCores, wanted: int, out) -> None:
    out.put(idle.borrow(wanted))


def test_idle_cores_are_shared_with_spawned_processes():
    context = multiprocessing.get_context("spawn")
    idle, out = IdleCores(context), context.Queue()
    idle.freed(2)
    child = context.Process(target=_borrow_in_child, args=(idle, 5, out))
    child.start()
    taken = out.get(timeout=60)
    child.join(timeout=60)
    assert (taken, idle.idle, idle.lent, child.exitcode) == (2, 0, 2, 0)
    idle.give_back(2)
    assert idle.idle == 2


def _without_profile(result):
    return result.model_copy(update={"profile": Profile()})


def test_a_lent_core_changes_no_number_and_no_gradient_count():
    settings = Settings(conformers=ConformerSettings(max_conformers=4, n_optimize=2))
    water, pentane = species("O"), species("CCCCC")  # water finishes long before pentane's Hessians start
    serial = {sp: compute_one(sp, settings) for sp in (water, pentane)}
    idle, pooled = IdleCores(multiprocessing.get_context("spawn")), {}
    _compute_in_pool([water, pentane], settings, 2, lambda sp, result: pooled.__setitem__(sp, result), idle)
    assert idle.lent >= 1  # pentane's Hessians (two column blocks) ran on both cores
    assert idle.idle == 2  # both workers done, the lent core given back
    for sp in (water, pentane):
        assert _without_profile(pooled[sp]) == _without_profile(serial[sp])
        assert pooled[sp].profile.gradients == serial[sp].profile.gradients


def test_a_serial_run_lends_nothing():
    from cationcalc.compute.cores import installed_lender

    compute_many([species("O")], Settings(), workers=1)
    assert installed_lender() is None


def test_one_species_on_several_workers_lends_their_cores_in_this_process(monkeypatch):
    from cationcalc.compute import hessian
    from cationcalc.compute.cores import installed_lender

    loans = []

    def recording_borrow(wanted):
        loans.append(hessian_borrow(wanted))
        return loans[-1]

    hessian_borrow = hessian.borrow_cores
    monkeypatch.setattr(hessian, "borrow_cores", recording_borrow)
    settings = Settings(conformers=ConformerSettings(max_conformers=2, n_optimize=1))
    pentane = species("CCCCC")
    lent = compute_many([pentane], settings, workers=2)[pentane]
    assert sum(loans) >= 1 and installed_lender() is None
    alone = compute_many([pentane], settings, workers=1)[pentane]
    assert _without_profile(lent) == _without_profile(alone)
    assert lent.profile.gradients == alone.profile.gradients
