"""Each place where the workbench leans on a library's internals fails here when the library changes under it.

Why each exists is written beside it (the numbers are from Chromium CPU profiles of a
slider drag and the browser benchmark, see DEVELOPERS.md). These tests check the
library internals the patches rely on, not speed: Panel 1.9's reactive ESM models and
widget debounce, and (in tests/test_access.py) Bokeh's websocket handler and the
standard library's gc.freeze. The browser-side patch of Bokeh's style sheets is checked
in tests/browser/test_workbench.py.
"""

from __future__ import annotations

import panel as pn

from gainboard.app.views.gain_sliders import PromptSlider
from gainboard.app.views.html_box import LiveHtml


def test_panel_still_keeps_a_components_parameters_on_its_models_data_and_our_fast_path_sets_them():
    # LiveHtml._update_model writes a text change straight into model.data (skipping Panel's probe
    # for child models); that needs the parameters of a JSComponent to live on model.data.
    box = LiveHtml(html="<b>before</b>")
    model = box.get_root()
    assert model.data.html == "<b>before</b>"
    assert hasattr(box, "_set_on_model")
    box.html = "<b>after</b>"
    assert model.data.html == "<b>after</b>"


def test_panel_widgets_still_debounce_browser_changes_and_our_slider_turns_it_off():
    # PromptSlider sets Panel's private _debounce to 0 (the workbench merges bursts itself); the
    # attribute must still exist on Panel's widgets for that to mean anything.
    assert getattr(pn.widgets.FloatSlider, "_debounce", None) not in (None, 0)
    assert PromptSlider._debounce == 0
