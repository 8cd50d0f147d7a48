"""Shared helpers for the benchmark scripts: the substrate set, the machine, results files.

Not a test module: every script in benchmarks/ prints figures and writes
``benchmarks/results/<name>.json``; ``benchmarks/README.md`` quotes them.
"""

from __future__ import annotations

import json
import os
import platform
import resource
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
RESULTS = HERE / "results"
SUBSTRATES = HERE / "substrates.smi"


def substrates(limit: int | None = None) -> list[tuple[str, str]]:
    """(SMILES, name) pairs of the fixed 24-substrate benchmark set."""
    items = []
    for line in SUBSTRATES.read_text(encoding="utf-8").splitlines():
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        parts = line.split(None, 1)
        items.append((parts[0], parts[1].strip() if len(parts) > 1 else ""))
    return items[:limit] if limit else items


def machine() -> dict:
    """What the figures were measured on."""
    cpu = platform.processor() or ""
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    try:
        cores = len(os.sched_getaffinity(0))
    except AttributeError:
        cores = os.cpu_count() or 1
    info = {"cpu": cpu, "cores": cores, "python": platform.python_version(), "system": platform.platform(),
            "load_average_1min": round(os.getloadavg()[0], 2)}
    try:
        from importlib.metadata import version

        info["tblite"] = version("tblite")
    except Exception:
        pass
    try:  # what the child processes use (the same environment decides)
        from cationcalc.engines.blas import blas_status, prepare_blas

        prepare_blas()
        status = blas_status()
        info["blas"] = status["library"] + (f" ({status['version']})" if status["version"] else "")
    except Exception as exc:
        info["blas"] = f"unknown ({exc})"

    return info


def peak_rss_mb() -> tuple[float, float]:
    """Peak resident memory (MB) of this process and of its largest finished child process."""
    own = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    children = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024.0
    return own, children


def run_child(script: Path, args: list[str], env: dict | None = None) -> dict:
    """Run ``script --child ARGS`` in a fresh interpreter; its last stdout line is JSON."""
    full_env = dict(os.environ)
    full_env.update(env or {})
    start = time.perf_counter()
    proc = subprocess.run([sys.executable, str(script), "--child", *args], capture_output=True, text=True,
                          env=full_env)
    if proc.returncode != 0:
        raise RuntimeError(f"{script.name} {' '.join(args)} failed:\n{proc.stderr[-3000:]}")
    data = json.loads(proc.stdout.strip().splitlines()[-1])
    data.setdefault("process_wall_s", time.perf_counter() - start)
    return data


def save(name: str, payload: dict) -> Path:
    RESULTS.mkdir(exist_ok=True)
    path = RESULTS / f"{name}.json"
    payload = {"measured": time.strftime("%Y-%m-%d %H:%M %Z"), "machine": machine(), **payload}
    tmp = path.with_suffix(".json.tmp")
    tmp.write_text(json.dumps(payload, indent=2) + "\n", encoding="utf-8")
    os.replace(tmp, path)
    return path


def fit_exponent(sizes, costs) -> float:
    """Slope of log(cost) against log(size): cost ∝ size^slope."""
    import numpy as np

    x, y = np.log(np.asarray(sizes, float)), np.log(np.asarray(costs, float))
    return float(np.polyfit(x, y, 1)[0])
