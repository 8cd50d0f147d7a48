"""A result store: every computed species in one SQLite file, keyed by its hash.

A species result depends on the canonical SMILES, charge, multiplicity, all
:class:`~cationcalc.compute.models.Settings` (engine, method, solvent, temperature,
conformer and optimiser settings ...) and the package version;
:func:`~cationcalc.compute.models.species_key` hashes exactly these, and that hash is
the primary key here.  A species needed by two tasks, two studies or two runs
is therefore computed once.

The database runs in WAL mode with a busy timeout, so several processes may
read and write one store at the same time; every result is written in its
own transaction as soon as it is known (``INSERT OR IGNORE``: when two runs
computed the same species, the first row stays and both read the same
numbers).  A run killed in the middle loses at most the species that were
being computed.  Only successes are stored: a failed species is tried again
next time.  Keep the file on a local disk (SQLite's WAL mode does not work on
network file systems).

Example
-------
>>> import tempfile, os
>>> from cationcalc.execution.store import ResultStore
>>> from cationcalc.execution.executors import compute_one
>>> from cationcalc.compute.models import Settings
>>> from cationcalc.chem.species import species
>>> folder = tempfile.mkdtemp()
>>> store = ResultStore(os.path.join(folder, "store.sqlite"))
>>> water = compute_one(species("O"), Settings())
>>> store.put(water)
True
>>> store.get(water.key).E_hartree == water.E_hartree, store.hits, len(store)
(True, 1, 1)
>>> store.close()
"""

from __future__ import annotations

import datetime as _dt
import json
import os
import sqlite3
import stat
import time
from typing import Iterable, Iterator

from pydantic import ValidationError

from cationcalc.about import __version__
from cationcalc.compute.models import Settings, SpeciesResult, species_key

#: bumped when the table layout changes; an older file is refused with the fix
SCHEMA_VERSION = 1

_SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (
    name  TEXT PRIMARY KEY,
    value TEXT NOT NULL
);
CREATE TABLE IF NOT EXISTS species (
    key          TEXT PRIMARY KEY,
    smiles       TEXT NOT NULL,
    charge       INTEGER NOT NULL,
    multiplicity INTEGER NOT NULL,
    formula      TEXT NOT NULL,
    level        TEXT NOT NULL,
    solvent      TEXT,
    settings     TEXT NOT NULL,
    version      TEXT NOT NULL,
    created      TEXT NOT NULL,
    result       TEXT NOT NULL
);
CREATE INDEX IF NOT EXISTS species_smiles ON species (smiles, charge, multiplicity);
CREATE INDEX IF NOT EXISTS species_level ON species (level);
"""


class StoreError(RuntimeError):
    """The store file cannot be used (one line, with the fix)."""


def _check_writable_file(path: str, folder: str) -> None:
    """Refuse, before anything is computed, a store path that is not a writable regular file.

    ``/dev/null`` or a folder would make SQLite create ``<path>-journal`` beside it; a read-only
    file would only fail at the first write, after the work.  The folder must take the WAL files.
    """
    if os.path.exists(path):
        mode = os.stat(path).st_mode
        if not stat.S_ISREG(mode):
            raise StoreError(f"result store {path!r} is not a regular file; give the path of a new or "
                             "existing .sqlite file")
        if not os.access(path, os.R_OK | os.W_OK):
            raise StoreError(f"result store {path!r} is not writable; fix its permissions or give another "
                             "store path")
    probe = folder
    while not os.path.exists(probe):
        parent = os.path.dirname(probe)
        if parent == probe:
            break
        probe = parent
    if not os.path.isdir(probe):
        raise StoreError(f"cannot create result store {path!r}: {probe!r} is not a folder; give another "
                         "store path")
    if not os.access(probe, os.W_OK | os.X_OK):
        raise StoreError(f"cannot create result store {path!r}: folder {probe!r} is not writable; give "
                         "another store path")


def _now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat()


#: the columns and placeholders of one species row (after INSERT OR IGNORE / OR REPLACE)
_SPECIES_INSERT = ("INTO species (key, smiles, charge, multiplicity, formula, level, solvent, settings, version, "
                   "created, result) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)")


class ResultStore:
    """SQLite store of :class:`SpeciesResult` rows; ``hits``/``misses`` count look-ups.

    ``touched`` holds every key read or written through this object (what a
    study used), in first-use order; ``hit_keys`` the keys found.  Opening a store creates the file and its
    folder when they do not exist.
    """

    def __init__(self, path: str | os.PathLike, *, timeout_s: float = 60.0):
        self.path = os.fspath(path)
        self.hits = 0
        self.misses = 0
        self.writes = 0
        self.touched: dict[str, None] = {}
        self.hit_keys: set[str] = set()
        #: the first write that failed (the run goes on; its results stay in memory), or None
        self.write_error: str | None = None
        #: keys whose stored row failed validation and was set aside to be recomputed
        self.invalid_keys: list[str] = []
        folder = os.path.dirname(os.path.abspath(self.path))
        _check_writable_file(self.path, folder)
        try:
            os.makedirs(folder, exist_ok=True)
            # autocommit mode: every write below opens its own explicit transaction
            self._db = sqlite3.connect(self.path, timeout=timeout_s, isolation_level=None,
                                       check_same_thread=False)
        except (OSError, sqlite3.Error) as exc:
            raise StoreError(f"cannot open result store {self.path!r}: {exc}; give a writable path "
                             "on a local disk") from None
        try:
            self._db.execute(f"PRAGMA busy_timeout = {int(timeout_s * 1000)}")
            self._retry(self._initialise)
            # a garbage page in the middle of the file only shows when it is read: look at every page now
            verdict = str(self._retry(lambda: self._db.execute("PRAGMA quick_check").fetchone()[0]))
            if verdict != "ok":
                raise sqlite3.DatabaseError(f"damaged: {verdict.splitlines()[0]}")
        except StoreError:
            self._db.close()
            raise
        except sqlite3.DatabaseError as exc:
            self._db.close()
            raise StoreError(f"{self.path!r} is not a cationcalc result store ({exc}); move it away or "
                             "choose another store path") from None

    # -- set-up -----------------------------------------------------------------------------
    @staticmethod
    def _retry(action, attempts: int = 50):
        """Run ``action``; retry while another process holds a lock SQLite does not wait for."""
        for attempt in range(attempts):
            try:
                return action()
            except sqlite3.OperationalError as exc:
                if "locked" not in str(exc) and "busy" not in str(exc) or attempt == attempts - 1:
                    raise
                time.sleep(0.05 * (1 + attempt % 5))

    def _initialise(self) -> None:
        mode = self._db.execute("PRAGMA journal_mode = WAL").fetchone()[0]
        if str(mode).lower() != "wal":
            raise StoreError(f"result store {self.path!r} cannot use write-ahead logging (journal mode {mode}); "
                             "put it on a local disk")
        self._db.execute("PRAGMA synchronous = FULL")
        self._db.execute("BEGIN IMMEDIATE")
        try:
            for statement in filter(str.strip, _SCHEMA.split(";")):
                self._db.execute(statement)
            row = self._db.execute("SELECT value FROM meta WHERE name = 'schema_version'").fetchone()
            if row is None:
                self._db.execute("INSERT INTO meta (name, value) VALUES ('schema_version', ?)", (str(SCHEMA_VERSION),))
                self._db.execute("INSERT INTO meta (name, value) VALUES ('created_by', ?)",
                                 (f"cationcalc {__version__}",))
            elif int(row[0]) != SCHEMA_VERSION:
                raise StoreError(f"result store {self.path!r} has layout {row[0]}, this cationcalc reads "
                                 f"{SCHEMA_VERSION}; use a new store path")
            self._db.execute("COMMIT")
        except BaseException:
            self._db.execute("ROLLBACK")
            raise

    # -- reading ----------------------------------------------------------------------------
    def _read(self, key: str) -> SpeciesResult | None:
        """The validated row of ``key``; a row that fails validation is removed (recomputed) and gives None."""
        try:
            row = self._db.execute("SELECT result FROM species WHERE key = ?", (key,)).fetchone()
        except sqlite3.OperationalError:
            raise
        except sqlite3.DatabaseError as exc:
            raise StoreError(f"result store {self.path!r} is damaged ({exc}); move it away or choose another "
                             "store path") from None
        if row is None:
            return None
        try:
            return SpeciesResult.model_validate_json(row[0])
        except (ValidationError, ValueError):
            # e.g. a NaN written as null by an older version: recompute instead of failing every run
            self.invalid_keys.append(key)
            try:
                self._retry(lambda: self._db.execute("DELETE FROM species WHERE key = ? AND result = ?",
                                                     (key, row[0])))
            except sqlite3.Error:
                pass  # a read-only store: the species is recomputed and not stored
            return None

    def get(self, key: str) -> SpeciesResult | None:
        """The stored result for ``key`` (counts a hit) or None (counts a miss)."""
        result = self._read(key)
        self.touched.setdefault(key, None)
        if result is None:
            self.misses += 1
            return None
        self.hits += 1
        self.hit_keys.add(key)
        return result

    def get_species(self, smiles: str, charge: int, multiplicity: int, settings: Settings) -> SpeciesResult | None:
        return self.get(species_key(smiles, charge, multiplicity, settings))

    def peek(self, key: str) -> SpeciesResult | None:
        """Like :meth:`get` without counting or marking the key as used (for reports)."""
        return self._read(key)

    def __contains__(self, key: str) -> bool:
        return self._db.execute("SELECT 1 FROM species WHERE key = ?", (key,)).fetchone() is not None

    def count_present(self, keys: Iterable[str]) -> int:
        return sum(1 for k in set(keys) if k in self)

    def __len__(self) -> int:
        return int(self._db.execute("SELECT COUNT(*) FROM species").fetchone()[0])

    def keys(self) -> list[str]:
        return [r[0] for r in self._db.execute("SELECT key FROM species ORDER BY key")]

    def created(self, keys: Iterable[str]) -> dict[str, str]:
        """Creation time (UTC, ISO 8601) of each stored key."""
        out = {}
        for k in keys:
            row = self._db.execute("SELECT created FROM species WHERE key = ?", (k,)).fetchone()
            if row is not None:
                out[k] = row[0]
        return out

    def results(self, keys: Iterable[str]) -> Iterator[SpeciesResult]:
        for k in keys:
            r = self.peek(k)
            if r is not None:
                yield r

    def integrity(self) -> str:
        """SQLite's own check: 'ok' for a sound file."""
        return str(self._db.execute("PRAGMA integrity_check").fetchone()[0])

    # -- writing ----------------------------------------------------------------------------
    def put(self, result: SpeciesResult, settings: Settings | None = None) -> bool:
        """Store one result in its own transaction; False when the key was already there."""
        def insert(row: tuple) -> bool:
            return self._db.execute(f"INSERT OR IGNORE {_SPECIES_INSERT}", row).rowcount == 1

        return self._write(result, settings, insert)

    def put_lower(self, result: SpeciesResult, settings: Settings | None = None) -> bool:
        """Store ``result`` unless the stored row of its key is as low or lower (E); True when written.

        A species recomputed from a lower structure found later in a run replaces its row, and rows
        derived from the old structure (same species, settings and version at another level: its DFT
        single points) are removed, to be recomputed on the new structure.
        """
        def replace(row: tuple) -> bool:
            old = self._db.execute("SELECT result FROM species WHERE key = ?", (result.key,)).fetchone()
            stored = json.loads(old[0]).get("E_hartree") if old is not None else None
            if stored is not None and float(stored) <= result.E_hartree:
                return False
            self._db.execute(f"INSERT OR REPLACE {_SPECIES_INSERT}", row)
            if old is not None and settings is not None:
                self._db.execute("DELETE FROM species WHERE smiles = ? AND charge = ? AND multiplicity = ? "
                                 "AND settings = ? AND key != ? AND level != ? AND version = ?",
                                 (result.smiles, result.charge, result.multiplicity, row[7],
                                  result.key, result.level, result.version))
            return True

        return self._write(result, settings, replace)

    def _write(self, result: SpeciesResult, settings: Settings | None, body) -> bool:
        """Run ``body(row)`` for the species row of ``result`` in one retried transaction; its answer is whether
        a row was written.  A failing store raises StoreError and keeps the reason in ``write_error``."""
        settings_json = json.dumps(settings.model_dump(mode="json"), sort_keys=True) if settings else "{}"
        row = (result.key, result.smiles, result.charge, result.multiplicity, result.formula, result.level,
               result.solvent, settings_json, result.version, _now(), result.model_dump_json())
        self.touched.setdefault(result.key, None)

        def transaction() -> bool:
            self._db.execute("BEGIN IMMEDIATE")
            try:
                written = bool(body(row))
                self._db.execute("COMMIT")
            except BaseException:
                self._db.execute("ROLLBACK")
                raise
            return written

        try:
            written = bool(self._retry(transaction))
        except sqlite3.Error as exc:  # disk full, file made read-only, removed ...
            self.write_error = f"{exc}"
            raise StoreError(f"cannot write to result store {self.path!r} ({exc})") from None
        self.writes += int(written)
        return written

    # -- life cycle -------------------------------------------------------------------------
    def close(self) -> None:
        try:
            self._db.close()
        except sqlite3.Error:  # pragma: no cover - closing twice
            pass

    def __enter__(self) -> "ResultStore":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"ResultStore({self.path!r}, hits={self.hits}, misses={self.misses}, writes={self.writes})"
