"""K as a matrix, for gains with more than six entries: one cell per entry, one large slider for the selected one.

Inputs are the rows and states the columns, with their names and units on the
margins. Each cell shows the entry's value and is coloured by how close the value
is to the edge of its exact stable range (the others fixed), from the stable
margins that come with the evaluation (``view_ranges.margins``); a cell whose exact
range is not computed yet (during a drag, until it pauses) is drawn hatched, never
in a colour it might not deserve. The selected cell gets the large slider below the
matrix with its stable strip, typed value and locus.

Keyboard, while the matrix has the focus: arrow keys move the selection between the
cells shown; + and − nudge the selected entry by a fine step relative to its value,
with Shift (or Page Up / Page Down) coarsely, as the slider's arrow keys do. Each
input's row can be collapsed, and a filter keeps only the states whose name
contains its text.
"""

from __future__ import annotations

from html import escape

import numpy as np
import panel as pn
import param
from panel.custom import JSComponent

from ..number_text import format_number
from ..theme import PALETTE, entry_symbol
from .gain_sliders import EntryControls, GainSliders, entry_units

__all__ = ["GainMatrix", "MatrixGrid", "MARGIN_BANDS", "margin_band"]

WIDTH = 360
LARGE_SLIDER_WIDTH = 330

#: Colour bands of a cell (our own palette): (lowest relative margin, colour, words for the legend).
#: The relative margin is how far the value may move, either way, before the loop loses
#: stability, over the size of the value (gainboard.core.entry_margins).
MARGIN_BANDS = (
    (1.0, "#6fb58a", "can move by its own size or more"),
    (0.3, "#b7dcc2", "30–100 %"),
    (0.1, "#ecd89a", "10–30 %"),
    (0.0, "#e8a95c", "under 10 %: near the edge"),
)
UNSTABLE_COLOUR = "#e3a59c"
NO_EFFECT_COLOUR = "#e4e1d8"

CSS = f"""
.gb-matrix {{ outline: none; font-family: ui-monospace, monospace; overflow-x: auto; }}
.gb-matrix:focus-visible table {{ box-shadow: 0 0 0 2px {PALETTE['accent']}; }}
.gb-matrix table {{ border-collapse: separate; border-spacing: 1px; font-size: 9px; letter-spacing: -0.3px; }}
.gb-matrix th {{ font-family: sans-serif; font-weight: 600; color: {PALETTE['muted']}; font-size: 10px; }}
.gb-matrix th.gb-state {{ writing-mode: vertical-rl; transform: rotate(180deg); text-align: left;
  height: 92px; max-height: 92px; overflow: hidden; text-overflow: ellipsis; white-space: nowrap; padding: 1px 0; }}
.gb-matrix th.gb-input {{ text-align: left; max-width: 62px; overflow: hidden; text-overflow: ellipsis;
  white-space: nowrap; cursor: pointer; padding-right: 3px; }}
.gb-matrix td {{ width: 22px; min-width: 22px; max-width: 22px; height: 20px; text-align: center; cursor: pointer; color: {PALETTE['ink']};
  border-radius: 2px; padding: 0 1px; white-space: nowrap; overflow: hidden; }}
.gb-matrix td.gb-pending {{ background: repeating-linear-gradient(45deg, #f4f2ec, #f4f2ec 3px, #e6e2d8 3px, #e6e2d8 6px); }}
.gb-matrix td.gb-selected {{ outline: 2px solid {PALETTE['ink']}; outline-offset: -1px; font-weight: 700; }}
.gb-matrix tr.gb-collapsed td {{ display: none; }}
.gb-matrix .gb-units {{ font-weight: 400; }}
.gb-matrix-legend {{ font-size: 10.5px; color: {PALETTE['muted']}; line-height: 1.5; font-family: sans-serif; }}
.gb-matrix-legend .sw {{ display: inline-block; width: 10px; height: 10px; border-radius: 2px; margin: 0 3px 0 6px;
  vertical-align: middle; }}
"""


def margin_band(margin) -> tuple[str, str]:
    """(colour, css class) of a cell with stable margin ``margin`` (None: not computed yet)."""
    if margin is None:
        return "", "gb-pending"
    if not margin.has_effect:
        return NO_EFFECT_COLOUR, "gb-no-effect"
    if not margin.stable or margin.relative is None:
        return UNSTABLE_COLOUR, "gb-unstable"
    for lowest, colour, _ in MARGIN_BANDS:
        if margin.relative >= lowest:
            return colour, "gb-stable"
    return MARGIN_BANDS[-1][1], "gb-stable"


class MatrixGrid(JSComponent):
    """The cells of K as HTML, with clicks and keys sent to the server.

    Messages: ``{"select": [row, col]}``, ``{"toggle": row}`` (collapse an input's row),
    ``{"move": [rows, cols]}``, ``{"nudge": ±1, "coarse": bool}`` and ``{"end": true}``
    (a burst of nudges is over), rows and columns counted from 0.
    """

    html = param.String(default="", doc="The table shown.")

    _esm = """
const END_AFTER_MS = 400;
const MOVES = {ArrowRight: [0, 1], ArrowLeft: [0, -1], ArrowDown: [1, 0], ArrowUp: [-1, 0]};

export function render({ model, el }) {
  const box = document.createElement('div');
  box.className = 'gb-matrix';
  box.tabIndex = 0;
  box.setAttribute('role', 'grid');
  box.setAttribute('aria-label', 'gain matrix: arrow keys move the selection, + and - nudge the selected entry');
  box.innerHTML = model.html;
  let ending = null;
  let nudging = false;
  const end = () => { ending = null; if (nudging) { nudging = false; model.send_msg({end: true}); } };
  box.addEventListener('click', (event) => {
    const cell = event.target.closest('td[data-entry]');
    if (cell) { box.focus(); model.send_msg({select: cell.dataset.entry.split(',').map(Number)}); return; }
    const header = event.target.closest('th[data-input]');
    if (header) model.send_msg({toggle: Number(header.dataset.input)});
  });
  box.addEventListener('keydown', (event) => {
    if (MOVES[event.key]) {
      event.preventDefault();
      model.send_msg({move: MOVES[event.key]});
      return;
    }
    let steps = 0, coarse = event.shiftKey;
    if (event.key === '+' || event.key === '=') steps = 1;
    else if (event.key === '-' || event.key === '_') steps = -1;
    else if (event.key === 'PageUp') { steps = 1; coarse = true; }
    else if (event.key === 'PageDown') { steps = -1; coarse = true; }
    if (!steps) return;
    event.preventDefault();
    clearTimeout(ending);
    nudging = true;
    model.send_msg({nudge: steps, coarse: coarse});
  });
  box.addEventListener('keyup', () => { if (nudging) { clearTimeout(ending); ending = setTimeout(end, END_AFTER_MS); } });
  box.addEventListener('focusout', end);
  model.on('html', () => { box.innerHTML = model.html; });
  model.on('remove', () => clearTimeout(ending));
  el.appendChild(box);
}
"""

    def __init__(self, *, on_message, **params):
        super().__init__(**params)
        self._on_message = on_message

    def _handle_msg(self, msg) -> None:
        if isinstance(msg, dict):
            self._on_message(msg)


class GainMatrix:
    """The matrix view of K and the large slider of its selected entry.

    Parameters
    ----------
    state : DesignState
    scheduler : LatestOnly
    """

    css = GainSliders.css

    def __init__(self, state, scheduler):
        self.state = state
        self.scheduler = scheduler
        self.syncing = False
        self.collapsed: set[int] = set()
        self._evaluation = None
        self.filter = pn.widgets.TextInput(placeholder="filter states by name", width=200, margin=(2, 5),
                                           css_classes=["gb-matrix-filter"])
        self.filter.param.watch(lambda event: self._redraw(), "value_input")
        self.grid = MatrixGrid(on_message=self._on_message, stylesheets=[CSS], width=WIDTH, margin=(2, 5),
                               css_classes=["gb-gain-matrix"])
        self.legend = pn.pane.HTML(self._legend_html(), width=WIDTH, margin=(0, 5), stylesheets=[CSS])
        self.large = EntryControls(self, 0, 0, slider_width=LARGE_SLIDER_WIDTH)
        self.panel = pn.Column(self.filter, self.grid, self.legend, self.large.panel, margin=0)

    # -- refreshing ---------------------------------------------------------------------------

    def refresh(self, evaluation) -> None:
        self._evaluation = evaluation
        self._redraw()
        selected = evaluation.selected_entry or (0, 0)
        self.large.retarget(*selected)
        self.syncing = True
        try:
            self.large.show(evaluation, float(evaluation.gain[selected]), True)
        finally:
            self.syncing = False

    def refresh_values(self, evaluation) -> None:
        """During a gesture: the selected entry's number box only (the cells follow on the pause)."""
        selected = evaluation.selected_entry
        if selected is not None and selected == (self.large.row, self.large.col):
            self.syncing = True
            try:
                self.large.show_number(float(evaluation.gain[selected]))
            finally:
                self.syncing = False

    def visible_states(self, plant) -> list[int]:
        text = (self.filter.value_input or "").strip().lower()
        return [j for j, name in enumerate(plant.state_names) if not text or text in name.lower()]

    def _redraw(self) -> None:
        evaluation = self._evaluation
        if evaluation is None:
            return
        self.grid.html = self._table_html(evaluation)

    def _table_html(self, evaluation) -> str:
        plant, gain = evaluation.plant, np.asarray(evaluation.gain, dtype=float)
        margins = evaluation.view_ranges.margins if evaluation.view_ranges is not None else {}
        columns = self.visible_states(plant)
        selected = evaluation.selected_entry
        head = ['<th></th>']
        for j in columns:
            unit = plant.state_units[j]
            head.append(f'<th class="gb-state" title="{escape(plant.state_names[j])}'
                        f'{f" ({escape(unit)})" if unit else ""}">{escape(plant.state_names[j])}'
                        f'{f" <span class=gb-units>({escape(unit)})</span>" if unit else ""}</th>')
        rows = []
        for i in range(plant.input_count):
            collapsed = i in self.collapsed
            unit = plant.input_units[i]
            name = escape(plant.input_names[i]) + (f" ({escape(unit)})" if unit else "")
            mark = "▸" if collapsed else "▾"
            cells = [f'<th class="gb-input" data-input="{i}" title="{name}: click to '
                     f'{"show" if collapsed else "collapse"} this input\'s row">{mark} {name}</th>']
            for j in columns:
                colour, kind = margin_band(margins.get((i, j)))
                classes = [kind] + (["gb-selected"] if selected == (i, j) else [])
                style = f' style="background:{colour}"' if colour else ""
                tip = f"{entry_symbol(i, j)} = {format_number(gain[i, j], 6)} {entry_units(plant, i, j)}"
                cells.append(f'<td class="{" ".join(classes)}" data-entry="{i},{j}"{style} title="{escape(tip)}">'
                             f'{escape(format_number(gain[i, j], 2, compact=True))}</td>')
            rows.append(f'<tr class="{"gb-collapsed" if collapsed else ""}">{"".join(cells)}</tr>')
        hidden = plant.state_count - len(columns)
        note = (f'<div class="gb-matrix-legend">{hidden} of {plant.state_count} states hidden by the filter</div>'
                if hidden else "")
        return f'<table><tr>{"".join(head)}</tr>{"".join(rows)}</table>{note}'

    @staticmethod
    def _legend_html() -> str:
        keys = [f'<span class="sw" style="background:{colour}"></span>{words}' for _, colour, words in MARGIN_BANDS]
        keys.append(f'<span class="sw" style="background:{UNSTABLE_COLOUR}"></span>unstable now')
        keys.append(f'<span class="sw" style="background:{NO_EFFECT_COLOUR}"></span>moves no pole')
        keys.append('<span class="sw gb-pending" style="background:repeating-linear-gradient(45deg,#f4f2ec,#f4f2ec 2px,'
                    '#e6e2d8 2px,#e6e2d8 4px)"></span>range not computed yet')
        return ('<div class="gb-matrix-legend">Colour: how far each entry may move, either way and the others '
                'fixed, before the loop loses stability (its exact stable range), against its own size:<br>'
                + " ".join(keys) + "</div>")

    # -- user actions: only ever set state --------------------------------------------------------

    def _on_message(self, msg: dict) -> None:
        evaluation = self.state.evaluation
        plant = evaluation.plant
        if "select" in msg:
            row, col = (int(v) for v in msg["select"])
            self.state.select_entry(row, col)
        elif "toggle" in msg:
            row = int(msg["toggle"])
            self.collapsed.symmetric_difference_update({row})
            self._redraw()
        elif "move" in msg:
            self._move(plant, *(int(v) for v in msg["move"]))
        elif "nudge" in msg:
            row, col = evaluation.selected_entry or (0, 0)
            self.state.nudge_entry(row, col, 1 if int(msg["nudge"]) > 0 else -1, coarse=bool(msg.get("coarse")))
        elif msg.get("end"):
            self.state.end_gesture()

    def _move(self, plant, rows: int, cols: int) -> None:
        """Select the next cell shown in that direction (collapsed rows and filtered columns are skipped)."""
        columns = self.visible_states(plant)
        open_rows = [i for i in range(plant.input_count) if i not in self.collapsed]
        if not columns or not open_rows:
            return
        row, col = self.state.selected_entry or (open_rows[0], columns[0])
        row_index = open_rows.index(row) if row in open_rows else 0
        col_index = columns.index(col) if col in columns else 0
        row_index = min(max(row_index + rows, 0), len(open_rows) - 1)
        col_index = min(max(col_index + cols, 0), len(columns) - 1)
        target = (open_rows[row_index], columns[col_index])
        if target != self.state.selected_entry:
            self.state.select_entry(*target)


class GainEntries:
    """The Gains tab's entries: one slider per entry for a small K, the matrix for a larger one.

    Which one follows from the evaluation: when its view ranges give every entry a slider
    range (K has at most ``gainboard.core.ONE_SLIDER_PER_ENTRY_UP_TO`` entries) every entry
    gets a slider; otherwise the matrix with one large slider for the selected entry.
    """

    def __init__(self, state, scheduler):
        self.sliders = GainSliders(state, scheduler)
        self.matrix = GainMatrix(state, scheduler)
        self.panel = pn.Column(margin=0, sizing_mode="stretch_width")
        self._shown = None

    def _choose(self, evaluation):
        m, n = evaluation.gain.shape
        every_entry = evaluation.view_ranges is not None and len(evaluation.view_ranges.sliders) == m * n
        chosen = self.sliders if every_entry else self.matrix
        if chosen is not self._shown:
            self.panel.objects = [chosen.panel]
            self._shown = chosen
        return chosen

    def refresh(self, evaluation) -> None:
        self._choose(evaluation).refresh(evaluation)

    def refresh_values(self, evaluation) -> None:
        self._choose(evaluation).refresh_values(evaluation)
