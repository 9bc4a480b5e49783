"""Keyboard access: tab headers, and fine arrow-key nudges of the gain sliders.

Bokeh's tab headers take the focus (Tab key) but switch only on a mouse click.
This invisible component lets Enter or Space on a focused tab header switch to
that tab, so every part of the workbench can be reached without a mouse. The
script is inline and has no imports: nothing is fetched.
"""

from __future__ import annotations

from panel.custom import JSComponent

__all__ = ["TabKeys", "NudgeKeys", "HistoryKeys"]


class TabKeys(JSComponent):
    """Enter or Space on a focused tab header activates that tab."""

    _esm = """
export function render({ el }) {
  if (!window.__gainboardTabKeys) {
    window.__gainboardTabKeys = true;
    document.addEventListener('keydown', (event) => {
      if (event.key !== 'Enter' && event.key !== ' ') return;
      const target = event.composedPath()[0];
      if (target && target.classList && target.classList.contains('bk-tab')) {
        event.preventDefault();
        target.click();
      }
    }, true);
  }
  el.style.display = 'none';
}
"""


class NudgeKeys(JSComponent):
    """Arrow keys on a gain slider nudge its entry by a fine step relative to its value (Shift: coarse).

    The slider's own keys snap to its grid (one press moved −248.949 to −245) and end the
    gesture on every press, so each press ran the full evaluation. This invisible
    component takes the arrow keys (and Page Up / Page Down, always coarse) of every
    handle inside an element of class ``gb-slider-ROW-COL`` before the slider sees
    them, and sends ``{"row", "col", "steps", "coarse"}`` (counted from 1, as the class);
    the presses of one burst are a gesture, which ends ``END_AFTER_MS`` after the last
    key goes up, or when the handle loses the focus (``{"end": true}``).

    Parameters
    ----------
    on_nudge : callable
        ``on_nudge(row, col, steps, coarse)`` with zero-based row and col.
    on_end : callable
        The burst of presses is over.
    """

    _esm = """
const END_AFTER_MS = 400;
const KEYS = {ArrowRight: [1, false], ArrowUp: [1, false], ArrowLeft: [-1, false], ArrowDown: [-1, false],
              PageUp: [1, true], PageDown: [-1, true]};

function sliderEntry(event) {
  for (const element of event.composedPath()) {
    if (!element.classList) continue;
    for (const name of element.classList) {
      const found = /^gb-slider-(\\d+)-(\\d+)$/.exec(name);
      if (found) return [Number(found[1]), Number(found[2])];
    }
  }
  return null;
}

export function render({ model, el }) {
  let ending = null;
  let active = false;
  const end = () => {
    clearTimeout(ending);
    ending = null;
    if (active) { active = false; model.send_msg({end: true}); }
  };
  const onKeyDown = (event) => {
    const key = KEYS[event.key];
    const target = event.composedPath()[0];
    if (!key || !target || !target.classList || !target.classList.contains('noUi-handle')) return;
    const entry = sliderEntry(event);
    if (!entry) return;
    event.preventDefault();
    event.stopPropagation();  // in the capture phase: the slider's own key handling never runs
    clearTimeout(ending);
    active = true;
    model.send_msg({row: entry[0], col: entry[1], steps: key[0], coarse: key[1] || event.shiftKey});
  };
  const onKeyUp = (event) => {
    if (active && KEYS[event.key]) { clearTimeout(ending); ending = setTimeout(end, END_AFTER_MS); }
  };
  const onBlur = (event) => {
    const target = event.composedPath()[0];
    if (active && target && target.classList && target.classList.contains('noUi-handle')) end();
  };
  document.addEventListener('keydown', onKeyDown, true);
  document.addEventListener('keyup', onKeyUp, true);
  document.addEventListener('focusout', onBlur, true);
  model.on('remove', () => {
    document.removeEventListener('keydown', onKeyDown, true);
    document.removeEventListener('keyup', onKeyUp, true);
    document.removeEventListener('focusout', onBlur, true);
  });
  el.style.display = 'none';
}
"""

    def __init__(self, *, on_nudge, on_end, **params):
        super().__init__(**params)
        self._on_nudge = on_nudge
        self._on_end = on_end

    def _handle_msg(self, msg) -> None:
        if not isinstance(msg, dict):
            return
        if msg.get("end"):
            self._on_end()
            return
        try:
            row, col, steps = int(msg["row"]) - 1, int(msg["col"]) - 1, int(msg["steps"])
        except (KeyError, TypeError, ValueError):
            return  # not a message this component sends
        if steps in (-1, 1) and row >= 0 and col >= 0:
            self._on_nudge(row, col, steps, bool(msg.get("coarse")))


class HistoryKeys(JSComponent):
    """Ctrl+Z undoes, Ctrl+Shift+Z or Ctrl+Y redoes (⌘ on a Mac) — unless the focus is in a text field.

    In a text box or number box the keys keep their own meaning (undoing typing), so the
    design is never changed from under a field being edited. Sends ``{"history": "undo"}``
    or ``{"history": "redo"}``.

    Parameters
    ----------
    on_undo, on_redo : callable
        What the keys do.
    """

    _esm = """
function inTextField(event) {
  for (const element of event.composedPath()) {
    if (!element.tagName) continue;
    const tag = element.tagName.toLowerCase();
    if (tag === 'textarea' || tag === 'select' || element.isContentEditable) return true;
    if (tag === 'input' && !['button', 'checkbox', 'radio', 'range', 'submit'].includes(element.type)) return true;
  }
  return false;
}

export function render({ model, el }) {
  const onKeyDown = (event) => {
    if (!(event.ctrlKey || event.metaKey) || event.altKey) return;
    const key = event.key.toLowerCase();
    const action = key === 'z' ? (event.shiftKey ? 'redo' : 'undo') : (key === 'y' && !event.shiftKey ? 'redo' : null);
    if (!action || inTextField(event)) return;
    event.preventDefault();
    model.send_msg({history: action});
  };
  document.addEventListener('keydown', onKeyDown, true);
  model.on('remove', () => document.removeEventListener('keydown', onKeyDown, true));
  el.style.display = 'none';
}
"""

    def __init__(self, *, on_undo, on_redo, **params):
        super().__init__(**params)
        self._actions = {"undo": on_undo, "redo": on_redo}

    def _handle_msg(self, msg) -> None:
        action = self._actions.get(msg.get("history")) if isinstance(msg, dict) else None
        if action is not None:
            action()
