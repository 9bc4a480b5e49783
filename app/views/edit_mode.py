"""What the engineer is editing: the controller gain K or the estimator gain L, always in view.

A two-way switch above the pole map and one line saying what a drag and the sliders
change now, so the screen never leaves it unclear which gain is being edited.
"""

from __future__ import annotations

import panel as pn

from ..theme import PALETTE, TABLE_CSS

__all__ = ["EditMode", "MODE_LABELS"]

#: Switch label → the state's editing mode.
MODE_LABELS = {"Controller K": "controller", "Estimator L": "estimator"}
_BANNERS = {
    "controller": ("Editing the controller gain K: drag × poles; K sliders in Gains.", PALETTE["closed_loop"]),
    "estimator": ("Editing the estimator gain L: drag ◆ poles; L sliders in Estimator; u = −K x̂.",
                  PALETTE["estimator"]),
}


class EditMode:
    """The K / L switch and the banner that names the gain being edited."""

    def __init__(self, state):
        self.state = state
        self.switch = pn.widgets.RadioButtonGroup(options=list(MODE_LABELS), value="Controller K", color="primary",
                                                  variant="outline", margin=(2, 5), width=200,
                                                  css_classes=["gb-edit-mode"])
        self.banner = pn.pane.HTML("", width=255, height=36, margin=(0, 5), stylesheets=[TABLE_CSS],
                                   css_classes=["gb-edit-banner"])
        self._syncing = False
        self.switch.param.watch(self._switched, "value")
        self.panel = pn.Row(self.switch, self.banner, margin=0)

    def _switched(self, event) -> None:
        if self._syncing:
            return
        if not self.state.set_editing(MODE_LABELS[event.new]):
            self.refresh(self.state.evaluation)  # refused: show the mode that holds

    def refresh(self, evaluation) -> None:
        mode = self.state.editing
        label = next(text for text, value in MODE_LABELS.items() if value == mode)
        self._syncing = True
        try:
            if self.switch.value != label:
                self.switch.value = label
        finally:
            self._syncing = False
        text, colour = _BANNERS[mode]
        self.banner.object = (f'<div class="gb-small gb-edit-text" style="border-left:5px solid {colour};padding:0 6px;'
                              f'line-height:1.3;color:{PALETTE["ink"]}"><b>{text.split(":")[0]}</b>:'
                              f'{text.split(":", 1)[1]}</div>')
