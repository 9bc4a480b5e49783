"""Keyboard access for the tab headers.

Bokeh's tab headers take the focus (Tab key) but switch only on a mouse click.
This invisible component lets Enter or Space on a focused tab header switch to
that tab, so every part of the workbench can be reached without a mouse. The
script is inline and has no imports: nothing is fetched.
"""

from __future__ import annotations

from panel.custom import JSComponent

__all__ = ["TabKeys"]


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
