"""The result store: round trip, reuse through compute_many, failures, concurrent writers."""

import multiprocessing
import sqlite3

import pytest

from cationcalc.execution.executors import SpeciesFailure, compute_many, compute_one
from cationcalc.compute.models import Settings, species_key
from cationcalc.chem.species import species
from cationcalc.execution.store import ResultStore, StoreError


@pytest.fixture(scope="module")
def water_result(gas):
    return compute_one(species("O"), gas)


def test_round_trip_equals_the_computed_result(tmp_path, water_result, gas):
    path = tmp_path / "store.sqlite"
    with ResultStore(path) as store:
        assert store.put(water_result, gas) is True
        assert store.put(water_result, gas) is False  # second writer of one key: first row stays
        assert len(store) == 1 and store.writes == 1
    with ResultStore(path) as store:  # a new connection, as in the next run
        assert store.get("0" * 64) is None
        again = store.get(water_result.key)
        assert (store.hits, store.misses) == (1, 1)
    assert again == water_result
    assert again.positions_angstrom == water_result.positions_angstrom
    assert again.key == species_key("O", 0, 1, gas)


def test_compute_many_reads_the_store_instead_of_computing(tmp_path, gas):
    wanted = [species("O"), species("C"), species("O")]
    computed = []
    with ResultStore(tmp_path / "s.sqlite") as store:
        first = compute_many(wanted, gas, workers=1, store=store, progress=lambda sp, r: computed.append(sp))
        assert len(computed) == 2 and store.writes == 2 and store.misses == 2
    computed.clear()
    with ResultStore(tmp_path / "s.sqlite") as store:
        second = compute_many(wanted, gas, workers=1, store=store, progress=lambda sp, r: computed.append(sp))
        assert computed == [] and store.hits == 2 and store.writes == 0
    assert second == first
    # a stored result equals a fresh computation (the pipeline is deterministic)
    fresh = compute_one(species("C"), gas)
    assert fresh.model_dump(exclude={"profile"}) == second[species("C")].model_dump(exclude={"profile"})


def test_other_settings_are_another_key(tmp_path, gas, water):
    with ResultStore(tmp_path / "s.sqlite") as store:
        compute_many([species("O")], gas, store=store)
        compute_many([species("O")], water, store=store)
        assert len(store) == 2 and store.hits == 0


def test_failures_are_not_stored_and_are_retried(tmp_path):
    hopeless = Settings(max_steps=1)  # no optimisation converges in one step
    with ResultStore(tmp_path / "s.sqlite") as store:
        out = compute_many([species("CCO")], hopeless, store=store)
        assert isinstance(out[species("CCO")], SpeciesFailure)
        assert len(store) == 0
        compute_many([species("CCO")], hopeless, store=store)
        assert store.misses == 2 and store.hits == 0


def test_a_file_that_is_not_a_store_is_refused_in_one_line(tmp_path):
    bogus = tmp_path / "notes.sqlite"
    bogus.write_text("these are my notes, not a database\n" * 100)
    with pytest.raises(StoreError) as info:
        ResultStore(bogus)
    assert "notes.sqlite" in str(info.value) and "\n" not in str(info.value)
    assert bogus.read_text().startswith("these are my notes")  # nothing lost


def _writer(path, payload, offset, count, start):
    from cationcalc.compute.models import SpeciesResult
    from cationcalc.execution.store import ResultStore

    template = SpeciesResult.model_validate_json(payload)
    start.wait()
    store = ResultStore(path, timeout_s=30)
    inserted = 0
    for i in range(offset, offset + count):
        inserted += store.put(template.model_copy(update={"key": f"{i:064d}", "smiles": f"X{i}"}))
        if i % 7 == 0:
            assert store.get(f"{i:064d}") is not None
    store.close()
    return inserted


def test_two_concurrent_writers_do_not_corrupt_the_store(tmp_path, water_result):
    path = str(tmp_path / "shared.sqlite")  # created by the writers themselves, at the same moment
    context = multiprocessing.get_context("spawn")
    with context.Manager() as manager:
        start = manager.Event()
        with context.Pool(2) as pool:
            jobs = [pool.apply_async(_writer, (path, water_result.model_dump_json(), offset, 150, start))
                    for offset in (0, 100)]  # keys 100..149 are written by both
            start.set()
            inserted = [job.get(timeout=120) for job in jobs]
    assert sum(inserted) == 250  # every key exactly once, whoever came first
    with ResultStore(path) as store:
        assert store.integrity() == "ok"
        assert len(store) == 250
        assert all(r.smiles.startswith("X") for r in store.results(store.keys()))
    rows = sqlite3.connect(path).execute("SELECT COUNT(DISTINCT key), COUNT(*) FROM species").fetchone()
    assert rows == (250, 250)
