"""Count the species in a result store file while another process writes it (tests only).

Read with plain sqlite3 so that polling never creates or initialises the store itself.
Also the start-up of a child that a test stops with Ctrl-C.
"""

import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path


def stored_species(store: Path) -> int:
    if not store.exists():
        return 0
    try:
        with sqlite3.connect(store, timeout=5) as db:
            return db.execute("SELECT COUNT(*) FROM species").fetchone()[0]
    except sqlite3.OperationalError:  # the table is not there yet
        return 0


def sigint_as_in_a_terminal() -> None:
    """``preexec_fn`` of a child a test stops with SIGINT: SIGINT at its default, as for a command typed at a
    terminal (a test run started in the background passes SIGINT on ignored, and the Ctrl-C would test nothing)."""
    signal.signal(signal.SIGINT, signal.SIG_DFL)


def sigint_ignored() -> None:
    """``preexec_fn`` of a child started as a background job of a non-interactive shell: SIGINT ignored."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)


def start_until_first_species(args: list[str], store: Path, env: dict, preexec_fn=sigint_as_in_a_terminal
                              ) -> subprocess.Popen:
    """Start ``python -m cationcalc.cli ARGS`` (pipes, text) and return once it has stored its first species."""
    proc = subprocess.Popen([sys.executable, "-m", "cationcalc.cli", *args], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, env=env, preexec_fn=preexec_fn)
    deadline = time.monotonic() + 120
    while stored_species(store) < 1:
        assert proc.poll() is None, proc.communicate()
        assert time.monotonic() < deadline, "nothing was stored within 2 minutes"
        time.sleep(0.02)
    return proc
