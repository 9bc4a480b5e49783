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

    def __init__(self, state, *, on_fit, on_lock=None):
        self.state = state
        self.choice = pn.widgets.Select(label="", options={}, width=235, margin=(2, 5),
                                        description="Entry whose locus and arrows are drawn")
        self.choice.param.watch(self._chosen, "value")
        # The pole map's ranges follow the content by the rule stated under the map; locked, they stay
        # where the user put them until "Fit view" (a change of plant or time domain still fits).
        self.fit_button = pn.widgets.Button(
            label="Fit view", width=72, margin=(2, 3),
            description="Frame the poles, the spec region and the locus now. Unlocked, the map refits by itself "
                        "when a pole comes within 5 % of an edge or everything fills less than 30 % of it (never "
                        "during a drag; after you zoom or pan, only a pole leaving the view refits)")
        self.fit_button.on_click(lambda event: on_fit())
        self.lock_toggle = pn.widgets.Toggle(label="Lock view", value=False, width=80, margin=(2, 3),
                                             css_classes=["gb-lock-view"])
        if on_lock is not None:
            self.lock_toggle.param.watch(lambda event: on_lock(bool(event.new)), "value")
        self._syncing = False
        self.panel = pn.Row(pn.pane.HTML('<div class="gb-small" style="padding-top:6px">locus of</div>',
                                         stylesheets=[TABLE_CSS], margin=(2, 0, 2, 5)),
                            self.choice, self.fit_button, self.lock_toggle, margin=0)

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
