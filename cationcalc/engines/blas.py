"""An optimized BLAS/LAPACK for tblite, from a registry package, switchable off.

The tblite wheel links the reference (unoptimized) BLAS and LAPACK it ships in
``tblite.libs``; its extension leaves the standard Fortran symbols (``dgemm_``,
``dsyevd_``, ...) to the dynamic linker.  A library loaded with
``RTLD_GLOBAL`` *before* tblite is imported comes first in the global lookup
scope, so those symbols then bind to it instead.  The library used is Intel
oneMKL's single dynamic library ``libmkl_rt`` from the PyPI package ``mkl``
(``pip install "cationcalc[fast]"``), told to use the GNU Fortran interface
with 32-bit integers (LP64, what the gfortran-built tblite expects) and the
sequential threading layer (one thread per process: parallelism stays over
molecules).  numpy and scipy are not affected: their OpenBLAS exports
prefixed symbols.

Measured on an AMD EPYC core (benchmarks/blas.py): energies identical to
1e-13 Eh; one energy+gradient 1.3× faster at 35 atoms, about 2× from 55
atoms up (2.2–2.7× at 182).

Switch: ``CATIONCALC_BLAS=auto`` (default: MKL when installed, else the
reference BLAS), ``mkl`` (MKL or an error), ``reference`` (never preload).
It must be decided before the first tblite calculation of a process; the
engine calls :func:`prepare_blas` before importing tblite.

Example
-------
>>> from cationcalc.engines.blas import prepare_blas, blas_status
>>> prepare_blas() in ("mkl", "reference")
True
>>> blas_status()["library"] in ("mkl", "reference")
True
"""

from __future__ import annotations

import ctypes
import os
import sys

ENV_VAR = "CATIONCALC_BLAS"
CHOICES = ("auto", "mkl", "reference")

# oneMKL run-time control constants (mkl_service.h)
_MKL_INTERFACE_LP64 = 0
_MKL_INTERFACE_GNU = 2
_MKL_THREADING_SEQUENTIAL = 1

_state: dict = {"library": None, "path": None, "reason": "", "version": None}


class BLASError(RuntimeError):
    """CATIONCALC_BLAS asks for something this installation cannot give."""


def _choice() -> str:
    value = os.environ.get(ENV_VAR, "auto").strip().lower() or "auto"
    aliases = {"off": "reference", "none": "reference", "0": "reference", "no": "reference", "1": "auto"}
    value = aliases.get(value, value)
    if value not in CHOICES:
        raise BLASError(f"{ENV_VAR}={os.environ.get(ENV_VAR)!r}: choose one of {', '.join(CHOICES)}")
    return value


def _mkl_runtime_path() -> str | None:
    """libmkl_rt as installed by the 'mkl' distribution, or None."""
    try:
        from importlib.metadata import PackageNotFoundError, files
    except ImportError:  # pragma: no cover
        return None
    try:
        listed = files("mkl") or []
    except PackageNotFoundError:
        return None
    for entry in listed:
        name = entry.name
        if name.startswith("libmkl_rt.so"):
            path = os.path.realpath(str(entry.locate()))
            if os.path.exists(path):
                return path
    return None


def _tblite_already_loaded() -> bool:
    return any(name in sys.modules for name in ("tblite.library", "tblite.interface", "tblite._libtblite"))


def prepare_blas() -> str:
    """Load the optimized BLAS for tblite if wanted and possible; returns 'mkl' or 'reference'.

    Idempotent.  Raises :class:`BLASError` only for ``CATIONCALC_BLAS=mkl``
    when MKL cannot be used.
    """
    if _state["library"] is not None:
        return _state["library"]
    choice = _choice()
    if choice == "reference":
        return _settle("reference", f"{ENV_VAR}=reference")
    if _tblite_already_loaded():
        return _settle("reference", "tblite was imported before cationcalc could choose its BLAS", choice)
    if sys.platform != "linux":
        return _settle("reference", "the preload works on Linux only", choice)
    path = _mkl_runtime_path()
    if path is None:
        return _settle("reference", 'MKL is not installed (pip install "cationcalc[fast]")', choice)
    try:
        lib = ctypes.CDLL(path, mode=ctypes.RTLD_GLOBAL)
        lib.MKL_Set_Interface_Layer.restype = ctypes.c_int
        lib.MKL_Set_Threading_Layer.restype = ctypes.c_int
        interface = lib.MKL_Set_Interface_Layer(_MKL_INTERFACE_LP64 + _MKL_INTERFACE_GNU)
        if interface != _MKL_INTERFACE_LP64 + _MKL_INTERFACE_GNU:
            return _settle("reference", f"MKL refused the GNU/LP64 interface (got {interface})", choice)
        if "MKL_THREADING_LAYER" not in os.environ:
            lib.MKL_Set_Threading_Layer(_MKL_THREADING_SEQUENTIAL)
        buffer = ctypes.create_string_buffer(256)
        lib.MKL_Get_Version_String(buffer, len(buffer))
        _state["version"] = buffer.value.decode(errors="replace").strip()
    except (OSError, AttributeError) as exc:
        return _settle("reference", f"could not load {path}: {exc}", choice)
    _state["path"] = path
    return _settle("mkl", "preloaded before tblite")


def _settle(library: str, reason: str, choice: str = "auto") -> str:
    if library == "reference" and choice == "mkl":
        raise BLASError(f"{ENV_VAR}=mkl but {reason}")
    _state["library"], _state["reason"] = library, reason
    return library


def mkl_in_use() -> bool:
    """True once MKL's computational core is mapped into this process (a BLAS call went to it)."""
    try:
        with open("/proc/self/maps", encoding="utf-8", errors="replace") as handle:
            return any("libmkl_core" in line for line in handle)
    except OSError:
        return False


def blas_status() -> dict:
    """What this process uses for tblite's BLAS/LAPACK and why."""
    return {"library": _state["library"] or "undecided", "reason": _state["reason"],
            "version": _state["version"], "path": _state["path"], "setting": os.environ.get(ENV_VAR, "auto")}


__all__ = ["prepare_blas", "blas_status", "mkl_in_use", "BLASError", "ENV_VAR"]
