"""gainboard.core: the numeric library behind gainboard.

Pure functions of arrays and small frozen dataclasses; no user-interface imports.
This module is the table of contents of the public API: every public name is
defined in one private module (listed in ``_MODULES``, each with its ``__all__``)
and re-exported here.

The private modules load on first use, in the order of ``_MODULES``, until the
name asked for is found: reading a plant file (``load_plant_file``, early in the
list) does not pay for scipy.signal or the analysis modules, which keeps
``gainboard --help`` and ``gainboard plants`` fast. ``dir()``, ``__all__`` and
``from gainboard.core import *`` load everything.
"""

from __future__ import annotations

import importlib

#: The private modules, in import order (a module's dependencies come before it).
_MODULES = (
    "_errors",
    "_plant",
    "_specs",
    "_plant_file",
    "_structure",
    "_stability",
    "_closed_loop",
    "_placement",
    "_single_entry",
    "_responses",
    "_spec_checks",
    "_lqr",
    "_margins",
    "_loop_frequency",
    "_integral_action",
    "_sampling_check",
    "_emulation",
    "_view_ranges",
    "_design_evaluation",
    "_noise",
    "_observability",
    "_reduced_estimator",
    "_estimator",
    "_kalman",
    "_compensator",
    "_compensator_responses",
    "_compensator_evaluation",
    "_compensator_sampling",
    "_expressions",
    "_plant_family",
    "_robustness",
    "_monte_carlo",
    "_distributed",
)

_loaded: set[str] = set()


def _load(module_name: str) -> None:
    module = importlib.import_module(f".{module_name}", __name__)
    globals().update((name, getattr(module, name)) for name in module.__all__)
    _loaded.add(module_name)


def _load_all() -> None:
    for module_name in _MODULES:
        if module_name not in _loaded:
            _load(module_name)


def __getattr__(name: str):
    if name == "__all__":
        _load_all()
        return sorted(n for module_name in _MODULES for n in importlib.import_module(f".{module_name}", __name__).__all__)
    for module_name in _MODULES:
        if module_name not in _loaded:
            _load(module_name)
            if name in globals():
                return globals()[name]
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    _load_all()
    return sorted(globals())
