"""True and estimated states through the estimator: the initial response from a wrong estimate.

The plant starts at its initial state, the estimate at zero (the estimator knows
nothing); solid lines are the true states, dashed lines the estimates, one colour per
state. All numbers come from the core (:func:`gainboard.core.simulate_compensator_responses`
through the state's one evaluation call).
"""

from __future__ import annotations

from html import escape

import numpy as np
import panel as pn
from bokeh.models import ColumnDataSource
from bokeh.plotting import figure

from ..theme import PALETTE, trace_colour
from .html_box import HtmlBox
from .responses import PLOT_WIDTH, _css, _finite_list

__all__ = ["EstimatorResponses"]


class EstimatorResponses:
    """One plot: every state, true and estimated, from a wrong initial estimate."""

    def __init__(self, state):
        self.state = state
        self.source = ColumnDataSource({"xs": [], "ys": [], "colour": [], "dash": []})
        fig = figure(width=PLOT_WIDTH + 40, height=190, tools="xwheel_zoom,xpan,reset", toolbar_location=None,
                     name="estimator_states", background_fill_color="#fdfcf9", border_fill_color=PALETTE["paper"],
                     outline_line_color=PALETTE["rule"])
        fig.title.text = "states through the estimator: true (solid) and estimated (dashed)"
        fig.title.text_color = PALETTE["muted"]
        fig.title.text_font_style = "normal"
        fig.title.text_font_size = "12px"
        fig.grid.grid_line_color = "#ece8de"
        fig.xaxis.axis_label = "time (s)"
        fig.axis.axis_label_text_font_style = "normal"
        fig.toolbar.logo = None
        fig.min_border_left = 55
        fig.multi_line("xs", "ys", source=self.source, line_color="colour", line_dash="dash", line_width=2.0)
        self.figure = fig
        self.legend = HtmlBox(css=_css(), width=PLOT_WIDTH + 40)
        self.plot = pn.pane.Bokeh(fig, margin=(0, 5))
        self.panel = pn.Column(self.plot, self.legend.panel, margin=0, visible=False)

    def refresh(self, evaluation) -> None:
        compensator = self.state.estimator_evaluation
        if compensator is None:
            self.panel.visible = False
            self.source.data = {"xs": [], "ys": [], "colour": [], "dash": []}
            self.legend.object = ""
            return
        self.panel.visible = True
        response = compensator.responses.initial
        time = _finite_list(response.time)
        data = {"xs": [], "ys": [], "colour": [], "dash": []}
        for k in range(response.true_states.shape[1]):
            for values, dash in ((response.true_states[:, k], "solid"), (response.estimates[:, k], "dashed")):
                data["xs"].append(time)
                data["ys"].append(_finite_list(values))
                data["colour"].append(trace_colour(k))
                data["dash"].append(dash)
        self.source.data = data
        plant = compensator.plant
        swatches = " ".join(f'<span class="sw" style="background:{trace_colour(k)}"></span>{escape(name)}'
                            for k, name in enumerate(plant.state_names))
        start = ", ".join(f"{float(v):.3g}" for v in np.asarray(compensator.responses.initial_estimate))
        self.legend.object = (f"<div class='gb-legend'>states: {swatches}</div><div class='gb-note'>The estimate starts "
                              f"at ({escape(start)}) while the plant starts at its initial state; the gap is the "
                              "estimation error.</div>")
