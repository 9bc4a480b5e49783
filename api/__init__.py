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
_PUBLIC_NAMES = {
    # plants and specs
    "Plant": "gainboard.core",
    "DesignSpecs": "gainboard.core",
    "plant_from_arrays": "gainboard._arrays",
    "load_plant_file": "gainboard.core",
    "load_specs_file": "gainboard.core",
    "load_bundled_plant": "gainboard.sample_plants",
    "bundled_plant_files": "gainboard.sample_plants",
    # design
    "assign_poles": "gainboard._verbs",
    "design_lqr": "gainboard.core",
    "bryson_weights": "gainboard.core",
    # analysis
    "EvaluationOptions": "gainboard.core",
    "evaluate_design": "gainboard._verbs",
    "entry_stable_intervals": "gainboard._verbs",
    "entry_locus": "gainboard.core",
    "simulate_responses": "gainboard.core",
    # results
    "Assignment": "gainboard._results",
    "Evaluation": "gainboard._results",
    "EntryIntervals": "gainboard._results",
    # design files and export
    "Design": "gainboard.app.design_file",
    "save_design": "gainboard.app.design_file",
    "load_design": "gainboard.app.design_file",
    "export_design": "gainboard.app.export",
    "export_gain": "gainboard._verbs",
    "EXPORT_FORMATS": "gainboard.app.export",
    # errors
    "GainboardError": "gainboard.core",
    "PlantError": "gainboard.core",
    # the notebook workbench (needs the [app] extra)
    "workbench": "gainboard._notebook",
}

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
