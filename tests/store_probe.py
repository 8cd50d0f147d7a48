"""Count the species in a result store file while another process writes it (tests only).

Read with plain sqlite3 so that polling never creates or initialises the store itself.
"""

import sqlite3
from pathlib import Path


def stored_species(store: Path) -> int:
    if not store.exists():
        return 0
    try:
        with sqlite3.connect(store, timeout=5) as db:
            return db.execute("SELECT COUNT(*) FROM species").fetchone()[0]
    except sqlite3.OperationalError:  # the table is not there yet
        return 0
