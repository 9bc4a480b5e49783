"""Which entry's locus the pole map draws: a chooser above the map, and the "Fit view" button."""

from __future__ import annotations

import panel as pn

from ..theme import TABLE_CSS, entry_symbol, estimator_entry_symbol

__all__ = ["EntryChoice"]


class EntryChoice:
    """The "locus of" chooser (every entry of K by name) and a button that fits the pole map again.

    Parameters
    ----------
    state : DesignState
    on_fit : callable
        Called by the "Fit view" button.
    """

    def __init__(self, state, *, on_fit):
        self.state = state
        self.choice = pn.widgets.Select(label="", options={}, width=290, margin=(2, 5),
                                        description="Entry whose locus and arrows are drawn")
        self.choice.param.watch(self._chosen, "value")
        self.fit_button = pn.widgets.Button(label="Fit view", width=80, margin=(2, 5))
        self.fit_button.on_click(lambda event: on_fit())
        self._syncing = False
        self.panel = pn.Row(pn.pane.HTML('<div class="gb-small" style="padding-top:6px">locus of</div>',
                                         stylesheets=[TABLE_CSS], margin=(2, 0, 2, 5)),
                            self.choice, self.fit_button, margin=0)

    def refresh(self, evaluation) -> None:
        plant = evaluation.plant
        compensator = self.state.estimator_evaluation
        if self.state.editing == "estimator" and compensator is not None:
            # editing L: the loci of its entries (rows: estimated states, columns: outputs)
            rows, cols = compensator.estimator_gain.shape
            names = compensator.gain_row_names
            options = {f"{estimator_entry_symbol(i, j)}: {names[i]} ← {plant.output_names[j]}": f"{i},{j}"
                       for i in range(rows) for j in range(cols)}
            selected = compensator.selected_entry
        else:
            options = {f"{entry_symbol(i, j)}: {plant.input_names[i]} ← {plant.state_names[j]}": f"{i},{j}"
                       for i in range(plant.input_count) for j in range(plant.state_count)}
            selected = evaluation.selected_entry
        self._syncing = True
        try:
            if self.choice.options != options:
                self.choice.options = options
            value = f"{selected[0]},{selected[1]}" if selected is not None else None
            if self.choice.value != value:
                self.choice.value = value
        finally:
            self._syncing = False

    def _chosen(self, event) -> None:
        if self._syncing or not event.new:
            return
        row, col = (int(v) for v in event.new.split(","))
        if self.state.editing == "estimator" and self.state.estimator_evaluation is not None:
            self.state.select_estimator_entry(row, col)
        else:
            self.state.select_entry(row, col)
