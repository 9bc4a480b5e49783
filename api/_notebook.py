"""The workbench as a Panel object for Jupyter notebooks and scripts (needs the ``[app]`` extra)."""

from __future__ import annotations

import functools
import sys

__all__ = ["workbench"]


def _panel():
    try:
        import panel
    except ImportError:  # the base install: numeric core and command line only
        from gainboard.core import GainboardError

        raise GainboardError("the workbench needs the browser stack: install gainboard[app] "
                             "(python3 -m pip install 'gainboard[app]')") from None
    return panel


def workbench(plant, gain=None, specs=None) -> "NotebookWorkbench":
    """The design workbench for ``plant``, shown inline in a notebook (or served with ``.servable()``).

    Parameters
    ----------
    plant : gainboard.core.Plant or str
        The plant, a plant file path or the name of a bundled plant (``"cart_pendulum"``).
    gain : array_like, shape (m, n), optional
        The starting K (rows: inputs, columns: states, 0-based); zeros when omitted.
    specs : gainboard.core.DesignSpecs, optional
        Specs to check; the plant's suggested specs when omitted.

    Returns
    -------
    NotebookWorkbench
        A Panel viewer: display it in a cell, read ``.gain`` and ``.design()``, or call
        ``.servable()`` in a script served with ``panel serve``.

    Notes
    -----
    The page's own styles are applied by this call (no ``pn.extension`` options needed);
    in a Jupyter kernel it also loads Panel's notebook extension. Designs from linear
    models must be validated on the real system with safe limits and emergency stops.
    """
    pn = _panel()
    from gainboard.app.theme import PAGE_CSS

    if PAGE_CSS not in pn.config.raw_css:
        pn.config.raw_css = [*pn.config.raw_css, PAGE_CSS]
    if "ipykernel" in sys.modules:
        pn.extension()
    return notebook_workbench_class()(plant, gain=gain, specs=specs)


@functools.cache
def notebook_workbench_class():
    """The class of :func:`workbench`'s result, made on first use: importing Panel (and pyviz_comms,
    which sets an environment variable) waits until a workbench is asked for."""
    return type("NotebookWorkbench", (_NotebookWorkbenchMethods, _panel().viewable.Viewer), {
        "__doc__": _NotebookWorkbenchMethods.__doc__, "__module__": __name__})


class _NotebookWorkbenchMethods:
    """One workbench (one design state) as a Panel viewer; see :func:`workbench`."""

    def __init__(self, plant, gain=None, specs=None, **params):
        super().__init__(**params)
        from gainboard.app.plant_catalogue import plant_from_reference
        from gainboard.app.state import DesignState
        from gainboard.app.workbench import Workbench

        label = text = ""
        if isinstance(plant, str):
            plant, label, text = plant_from_reference(plant)
        options = {} if specs is None else {"specs": specs}
        self.state = DesignState(plant, plant_label=label, plant_text=text, gain=gain, **options)
        self.workbench = Workbench(self.state)
        self._page = self.workbench.panel

    def __panel__(self):
        return self._page

    @property
    def gain(self):
        """The current K (a copy; inputs × states, 0-based). Assigning sets K as a slider would."""
        return self.state.gain.copy()

    @gain.setter
    def gain(self, value) -> None:
        if not self.state.set_gain(value):
            from gainboard.core import GainboardError

            raise GainboardError(self.state.message or "the gain was refused")

    @property
    def poles(self):
        """The closed-loop poles of the current K."""
        return self.state.evaluation.closed_loop.poles

    def design(self):
        """The current design (:class:`gainboard.Design`): save it with :func:`gainboard.save_design`."""
        return self.state.design()
