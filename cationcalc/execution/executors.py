"""Run many species: serially, on a process pool (one worker per core) or on Dask.

Species are independent, so parallelism is over species.  Each worker
process pins its numerical libraries to one thread (set in the package
``__init__`` before any engine is imported) and keeps one engine per
settings for all its species.  Once fewer species than workers remain,
the idle cores are lent to the species still running: their numerical
Hessians borrow them as threads (:mod:`cationcalc.execution.idle_cores`;
never more busy threads than workers; the numbers do not change), and a
single species asked for with several workers runs in this process with
their cores lent the same way.  A serial run (one worker) and Dask lend
nothing.  A species that fails becomes a
:class:`SpeciesFailure` carrying a one-line message; the others go on.

With a :class:`~cationcalc.execution.store.ResultStore`, species already stored are
read instead of computed, and every new result is written to the store (in
this process, in its own transaction) the moment it arrives, so an
interrupted batch loses only the species in flight.

``scheduler`` picks where species run: ``None``/``"processes"`` is the local
process pool; ``"dask-local"`` starts a local Dask cluster with ``workers``
single-threaded worker processes; ``"tcp://host:8786"`` (any Dask address)
uses a running Dask scheduler (``pip install "cationcalc[dask]"`` on the
client and on every worker); a ``distributed.Client`` is used as it is.
:func:`scheduler_context` sets one for every :func:`compute_many` inside it
(including those that tasks make).  The numbers do not depend on the
executor: each species is computed by the same deterministic code.

Example
-------
>>> from cationcalc.execution.executors import compute_many
>>> from cationcalc.compute.models import Settings
>>> from cationcalc.chem.species import species
>>> results = compute_many([species("O")], Settings(), workers=1)
>>> results[species("O")].point_group
'C2v'
"""

from __future__ import annotations

import contextlib
import contextvars
import multiprocessing
import os
import signal
import threading
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass
from typing import TYPE_CHECKING, Callable, Iterable, Iterator, Optional, Sequence, Union

import numpy as np

from cationcalc.about import __version__

from cationcalc.engines import get_engine
from cationcalc.engines.base import EngineError
from pydantic import ValidationError

from cationcalc.compute.cores import install_lender, installed_lender
from cationcalc.compute.models import Settings, SpeciesResult, species_key
from cationcalc.compute.pipeline import ComputationError, compute_species
from cationcalc.chem.species import InputError, Species
from cationcalc.execution.idle_cores import IdleCores

if TYPE_CHECKING:  # pragma: no cover
    import distributed

    from cationcalc.execution.store import ResultStore

#: where species are computed: None or 'processes' (the process pool), 'dask-local', a Dask address
#: (tcp://host:8786) or an open distributed.Client
Scheduler = Optional[Union[str, "distributed.Client"]]
#: called once per finished species (with its result or failure), e.g. to advance a progress bar
Progress = Callable[[Species, "SpeciesResult | SpeciesFailure"], None]


@dataclass(frozen=True)
class SpeciesFailure:
    """Why a species has no result (one line)."""

    message: str


class Interrupted(Exception):
    """Ctrl-C during a batch; ``results`` holds every species that finished (others are failures)."""

    def __init__(self, results: dict):
        super().__init__("interrupted")
        self.results = results


_ENGINES: dict = {}


def _engine_for(settings: Settings):
    key = (settings.engine, settings.scf_max_iterations)
    if key not in _ENGINES:
        _ENGINES[key] = get_engine(settings.engine, max_iterations=settings.scf_max_iterations)
    return _ENGINES[key]


_SIGINT_SEEN = False


def _plain_sigint_ignored() -> bool:
    """True when this process was started with SIGINT ignored and no SIGTERM asked it to stop.

    A background job of a non-interactive shell (``cationcalc run study.yaml &``,
    ``nohup``) starts with SIGINT ignored; :func:`terminate_as_interrupt` then
    installs a handler anyway, so that its own re-sent SIGINT stops the run, and a
    plain Ctrl-C stays ignored as the parent asked.
    """
    return _STOP_SIGNAL["ignore_plain_sigint"] and _STOP_SIGNAL["signal"] != "SIGTERM"


def _note_sigint(signum, frame):
    global _SIGINT_SEEN
    if _plain_sigint_ignored():
        return
    _SIGINT_SEEN = True
    raise KeyboardInterrupt


def _interrupt_unless_ignored(signum, frame):
    """SIGINT handler installed in place of SIG_IGN inside :func:`terminate_as_interrupt`."""
    if _plain_sigint_ignored():
        return
    raise KeyboardInterrupt


def sigint_seen() -> bool:
    """True when Ctrl-C arrived inside the current :func:`sigint_guard`."""
    return _SIGINT_SEEN


@contextlib.contextmanager
def sigint_guard() -> Iterator[None]:
    """Remember Ctrl-C even when a library swallows the KeyboardInterrupt, and raise it at the end.

    RDKit's substructure search catches the interrupt, prints "Substructure
    search was interrupted, result may not include all matches" and goes on
    with a partial answer; a species computed that way must not be stored.
    Active in the main thread while Python's own SIGINT handler (or an outer
    guard) is installed; a no-op otherwise.
    """
    global _SIGINT_SEEN
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = signal.getsignal(signal.SIGINT)
    if previous not in (signal.default_int_handler, _interrupt_unless_ignored, _note_sigint):
        yield
        return
    if previous is not _note_sigint:
        _SIGINT_SEEN = False
    signal.signal(signal.SIGINT, _note_sigint)
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)
    if _SIGINT_SEEN:
        raise KeyboardInterrupt


@contextlib.contextmanager
def _sigint_held():
    """Hold Ctrl-C until the species is done; it is delivered (KeyboardInterrupt) right after.

    RDKit's conformer embedding installs its own SIGINT handler, stops early
    and returns fewer conformers without raising: a species interrupted there
    would silently get a different result (and be stored).  Holding the
    signal in the computing thread avoids that; the parent of a process pool
    stays responsive and stops the workers.
    """
    if threading.current_thread() is not threading.main_thread() or not hasattr(signal, "pthread_sigmask"):
        yield
        return
    previous = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, previous)


def _unexpected(sp: Species, exc: BaseException, where: str = "worker") -> SpeciesFailure:
    """The one-line failure of a species whose computation raised something unforeseen (any executor)."""
    text = str(exc).splitlines()[0] if str(exc) else ""
    return SpeciesFailure(f"{sp.smiles}: {where} failed: {type(exc).__name__}: {text}")


def compute_one(sp: Species, settings: Settings, seeds: Sequence[np.ndarray] = ()) -> SpeciesResult | SpeciesFailure:
    """One species, with every expected failure turned into a SpeciesFailure.

    The cached engine starts each species from a clean state: an SCF seeded by
    whatever this process computed before (an isomer with the same atom list)
    would make the last digits depend on the order species reach a worker, and
    the same study must give the same numbers on every executor.  ``seeds``: further starting
    geometries (:func:`~cationcalc.compute.pipeline.compute_species`).
    """
    engine = _engine_for(settings)
    engine.reset()
    try:
        with sigint_guard():  # an interrupted species raises instead of returning a partial result
            with _sigint_held():
                result = compute_species(sp, settings, engine, seeds=seeds)
            return result
    except ValidationError as exc:  # a NaN or infinity in the result: never stored, never reported
        fields = ", ".join(".".join(str(p) for p in e["loc"]) for e in exc.errors()[:3])
        return SpeciesFailure(f"{sp.smiles}: the computation gave a non-finite or invalid value ({fields}); "
                              "nothing stored")
    except (ComputationError, EngineError, InputError, ValueError) as exc:
        return SpeciesFailure(str(exc).splitlines()[0] if str(exc) else type(exc).__name__)
    except RuntimeError as exc:  # RDKit/ASE errors
        return SpeciesFailure(f"{sp.smiles}: {type(exc).__name__}: {str(exc).splitlines()[0] if str(exc) else ''}")


def default_workers() -> int:
    return max(1, len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1))


def compute_many(species_list: Iterable[Species], settings: Settings, workers: int = 1,
                 progress: Progress | None = None,
                 store: ResultStore | None = None, scheduler: Scheduler = None
                 ) -> dict[Species, SpeciesResult | SpeciesFailure]:
    """Compute every distinct species; returns species → result or failure.

    ``store`` (a :class:`~cationcalc.execution.store.ResultStore`): stored species are
    read, not computed, and new successes are stored as they arrive.
    ``progress(species, result)`` is called for every species computed here
    (not for those read from the store).  ``scheduler``: see the module notes;
    None uses the one set by :func:`scheduler_context`, else the process pool.
    """
    unique = list(dict.fromkeys(species_list))
    results: dict[Species, SpeciesResult | SpeciesFailure] = {}
    if store is not None:
        for sp in unique:
            cached = store.get(species_key(sp.smiles, sp.charge, sp.multiplicity, settings))
            if cached is not None:
                results[sp] = cached
    todo = [sp for sp in unique if sp not in results]

    def finished(sp: Species, result: SpeciesResult | SpeciesFailure) -> None:
        if sigint_seen():
            raise KeyboardInterrupt
        if store is not None and isinstance(result, SpeciesResult) and store.write_error is None:
            from cationcalc.execution.store import StoreError

            try:
                store.put(result, settings)
            except StoreError:
                pass  # kept in memory; store.write_error tells the caller where nothing was written
        results[sp] = result
        if progress:
            progress(sp, result)

    if scheduler is None:
        scheduler = _SCHEDULER.get()
    try:
        with sigint_guard():
            if todo and scheduler not in (None, "processes", "local"):
                with _dask_client(scheduler, workers) as client:
                    _compute_on_dask(todo, settings, client, finished)
            elif todo:
                n = max(1, min(int(workers), len(todo)))
                if n == 1:
                    with _lending_here(int(workers) - 1):  # one species, more workers: its Hessians use them
                        for sp in todo:
                            try:
                                result = compute_one(sp, settings)
                            except Exception as exc:  # as a pool worker's exception: this species fails alone
                                result = _unexpected(sp, exc)
                            finished(sp, result)
                else:
                    _compute_in_pool(todo, settings, n, finished)
    except KeyboardInterrupt:
        for sp in unique:
            results.setdefault(sp, SpeciesFailure("interrupted before this species finished"))
        raise Interrupted({sp: results[sp] for sp in unique}) from None
    return {sp: results[sp] for sp in unique}


@contextlib.contextmanager
def _lending_here(cores: int) -> Iterator[None]:
    """Lend ``cores`` idle cores to the computation in this process (none: nothing installed, as serial)."""
    if cores < 1:
        yield
        return
    previous = installed_lender()
    idle = IdleCores(multiprocessing.get_context("spawn"))
    idle.freed(cores)
    install_lender(idle)
    try:
        yield
    finally:
        install_lender(previous)


def _compute_in_pool(todo, settings, workers, finished, idle: IdleCores | None = None) -> None:
    """Every species on a pool of ``workers`` processes; a worker left without a species lends its core.

    All species are queued at once, so once fewer species than workers remain,
    each species that finishes leaves a core idle for good: it is added to the
    pool's :class:`IdleCores`, from which the workers' numerical Hessians
    borrow threads (never more than the idle cores).  ``idle``: a count of the
    caller's (made from the spawn context), else a new one.
    """
    context = multiprocessing.get_context("spawn")
    idle = idle if idle is not None else IdleCores(context)
    pool = ProcessPoolExecutor(max_workers=workers, mp_context=context, initializer=_start_worker,
                               initargs=(os.getpid(), idle))
    futures = {pool.submit(compute_one, sp, settings): sp for sp in todo}
    remaining = len(futures)
    try:
        for future in as_completed(futures):
            sp = futures[future]
            remaining -= 1
            if remaining < workers:
                idle.freed(1)
            try:
                result = future.result()
            except Exception as exc:  # a crashed worker fails its species only
                result = _unexpected(sp, exc)
            finished(sp, result)
    except KeyboardInterrupt:
        # stop now: the species in flight are lost, everything finished is already stored
        for process in list((getattr(pool, "_processes", None) or {}).values()):
            process.terminate()
        pool.shutdown(wait=False, cancel_futures=True)
        raise
    finally:
        pool.shutdown(wait=True, cancel_futures=True)


def _start_worker(parent_pid: int, idle: IdleCores) -> None:
    """Pool-worker start-up: die with the parent; lend this worker's Hessians the pool's idle cores."""
    _die_with_parent(parent_pid)
    install_lender(idle)


def _die_with_parent(parent_pid: int) -> None:
    """Pool-worker start-up: exit when the parent process dies (SIGKILL, a batch scheduler's kill).

    Linux: ``prctl(PR_SET_PDEATHSIG, SIGKILL)``; elsewhere a daemon thread polls the parent's pid.
    Without this, workers of a killed run keep computing for nobody (and keep the resource
    tracker alive).
    """
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        if libc.prctl(1, int(signal.SIGKILL), 0, 0, 0) != 0:  # 1 = PR_SET_PDEATHSIG
            raise OSError(ctypes.get_errno(), "prctl")
    except (OSError, AttributeError):
        def watch() -> None:
            import time

            while os.getppid() == parent_pid:
                time.sleep(1.0)
            os._exit(1)

        threading.Thread(target=watch, daemon=True, name="cationcalc-parent-watch").start()
    if os.getppid() != parent_pid:  # the parent died before prctl took effect
        os._exit(1)


_STOP_SIGNAL: dict = {"signal": None, "ignore_plain_sigint": False}


def stop_signal() -> str | None:
    """'SIGTERM' when a :func:`terminate_as_interrupt` block was asked to stop by SIGTERM, else None."""
    return _STOP_SIGNAL["signal"]


@contextlib.contextmanager
def terminate_as_interrupt() -> Iterator[None]:
    """Treat SIGTERM (how batch schedulers stop jobs) as Ctrl-C for the code inside.

    The handler re-sends SIGINT to this process, so whatever handles Ctrl-C at that moment
    (finish the species in flight, keep finished results, stop the pool) handles SIGTERM too;
    :func:`stop_signal` then says it was SIGTERM.  A process started with SIGINT
    ignored (a background job) still stops on SIGTERM; a plain SIGINT stays ignored
    there.  Main thread only; a no-op elsewhere.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    _STOP_SIGNAL["signal"] = None

    def on_term(signum, frame):
        _STOP_SIGNAL["signal"] = "SIGTERM"
        os.kill(os.getpid(), signal.SIGINT)

    previous = signal.signal(signal.SIGTERM, on_term)
    previous_int = signal.getsignal(signal.SIGINT)
    if previous_int == signal.SIG_IGN:
        _STOP_SIGNAL["ignore_plain_sigint"] = True
        signal.signal(signal.SIGINT, _interrupt_unless_ignored)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)
        if previous_int == signal.SIG_IGN:
            signal.signal(signal.SIGINT, signal.SIG_IGN)
            _STOP_SIGNAL["ignore_plain_sigint"] = False


# -- Dask ------------------------------------------------------------------------------------

_SCHEDULER: contextvars.ContextVar = contextvars.ContextVar("cationcalc_scheduler", default=None)

#: thread pinning for Dask worker processes (the package import sets it too, but a worker
#: may load numerical libraries before it unpickles its first task)
_WORKER_ENV = {"OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1", "MKL_NUM_THREADS": "1",
               "OMP_STACKSIZE": os.environ.get("OMP_STACKSIZE", "256M"),
               "MKL_CBWR": os.environ.get("MKL_CBWR", "AUTO")}


def _import_distributed():
    try:
        import distributed
    except ImportError:
        raise ValueError('the Dask scheduler needs dask.distributed: pip install "cationcalc[dask]"') from None
    return distributed


@contextlib.contextmanager
def _dask_client(scheduler, workers: int = 1):
    """A ``distributed.Client`` for ``scheduler``; closes what it opened."""
    distributed = _import_distributed()
    if isinstance(scheduler, distributed.Client):
        yield scheduler
        return
    if not isinstance(scheduler, str) or not scheduler:
        raise ValueError(f"scheduler {scheduler!r}: use 'processes', 'dask-local' or a Dask address "
                         "such as tcp://host:8786")
    if scheduler == "dask-local":
        import shutil
        import tempfile

        import dask

        # the workers' scratch space in a folder of our own, removed afterwards (Dask would leave
        # dask-scratch-space/ in the system temp folder)
        scratch = tempfile.mkdtemp(prefix="cationcalc-dask-")
        try:
            with dask.config.set({"temporary-directory": scratch}):  # scheduler and nannies too
                cluster = distributed.LocalCluster(n_workers=max(1, int(workers)), threads_per_worker=1,
                                                   processes=True, dashboard_address=None,
                                                   env=dict(_WORKER_ENV), silence_logs=40, local_directory=scratch)
            try:
                client = distributed.Client(cluster)
                try:
                    yield client
                finally:
                    client.close()
            finally:
                cluster.close()
        finally:
            shutil.rmtree(scratch, ignore_errors=True)
        return
    if "://" not in scheduler:
        raise ValueError(f"scheduler {scheduler!r}: use 'processes', 'dask-local' or a Dask address "
                         "such as tcp://host:8786")
    try:
        client = distributed.Client(scheduler, timeout="10s")
    except (OSError, TimeoutError) as exc:
        raise ValueError(f"cannot reach the Dask scheduler at {scheduler}: {exc}; start it "
                         "(dask scheduler) or fix the address") from None
    try:
        yield client
    finally:
        client.close()


@contextlib.contextmanager
def scheduler_context(scheduler: Scheduler = None, workers: int = 1) -> Iterator[None]:
    """Every :func:`compute_many` inside uses ``scheduler`` (one Dask client for all of them)."""
    if scheduler in (None, "processes", "local"):
        token = _SCHEDULER.set(None)
        try:
            yield None
        finally:
            _SCHEDULER.reset(token)
        return
    with _dask_client(scheduler, workers) as client:
        token = _SCHEDULER.set(client)
        try:
            yield client
        finally:
            _SCHEDULER.reset(token)


def _compute_on_dask(todo, settings, client, finished) -> None:
    distributed = _import_distributed()
    futures = {client.submit(compute_one, sp, settings, pure=False): sp for sp in todo}
    try:
        for future in distributed.as_completed(list(futures)):
            sp = futures[future]
            try:
                result = future.result()
            except Exception as exc:  # a lost or crashed worker fails its species only
                result = SpeciesFailure(f"{sp.smiles}: Dask worker failed: {type(exc).__name__}: {exc}")
            if isinstance(result, SpeciesResult) and result.version != __version__:
                result = SpeciesFailure(f"{sp.smiles}: the Dask worker runs cationcalc {result.version}, this "
                                        f"client {__version__}; install the same version on every worker")
            finished(sp, result)
    finally:
        client.cancel([f for f in futures if not f.done()])
