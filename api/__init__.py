"""gainboard: design state-feedback gains K (u = −Kx) of linear plants from Python.

The main verbs are here at top level, under the names of :mod:`gainboard.core`
(plus :func:`plant_from_arrays` and :func:`workbench`). Indices are 0-based
(numpy's convention) everywhere in the Python API; the command line counts
entries from 1 as in k_ij.

Names load on first use, so ``import gainboard`` (and the command line, which
imports this package first) stays fast; importing never changes the process's
environment or its BLAS threads.

Designs from linear models must be validated on the real system with safe
actuator limits and a working emergency stop.
"""

from __future__ import annotations

import importlib

#: Public name -> module that defines it (loaded on first access; see ``__getattr__``).
_PUBLIC_NAMES = {}

__all__ = ["__version__", *_PUBLIC_NAMES]


def _installed_version() -> str:
    """The version of the installed distribution (package metadata, the one source of the number)."""
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("gainboard")
    except PackageNotFoundError:  # pragma: no cover - a source tree that was never installed
        return "0+unknown"


def __getattr__(name: str):
    if name == "__version__":  # read on demand: importlib.metadata alone costs ~50 ms at start-up
        globals()["__version__"] = _installed_version()
        return globals()["__version__"]
    module = _PUBLIC_NAMES.get(name)
    if module is None:
        raise AttributeError(f"module 'gainboard' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__():
    return sorted(set(globals()) | set(_PUBLIC_NAMES))
