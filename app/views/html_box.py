"""A block of HTML that changes often, updated without re-laying out the page.

Bokeh re-renders a Div (and Panel an HTML pane) on every text change and then
recomputes the layout of the whole page, which measures every plot again: about
100 ms per update on a laptop-class machine. This box is a small Panel
``JSComponent`` whose browser side only replaces its inner HTML, so the browser
reflows the text and nothing else. Its script has no imports: nothing is fetched.
"""

from __future__ import annotations

import param
from panel.custom import JSComponent

__all__ = ["HtmlBox", "LiveHtml"]


class LiveHtml(JSComponent):
    """HTML text whose changes are applied in place in the browser."""

    html = param.String(default="", doc="The HTML shown.")

    # The box never shrinks while updates keep coming (a slider or pole drag): its height only
    # ratchets up, in whole pixels, and shrinks to fit once the text has rested for a moment.
    # A box whose height changes, even by the fraction of a pixel a fallback-font glyph (✓, ₁)
    # adds to a line, makes Panel lay out the whole page again: about 20 ms in the browser per
    # update (CPU profile of a slider drag). While updates come, heights are read from a
    # ResizeObserver, after the browser's own layout, never by forcing a layout in an update.
    _esm = """
const REST_MS = 1500;

// Bokeh rewrites the position style sheet of every plot renderer on every repaint, even when
// the text is unchanged, and each rewrite makes the next CSS lookup of a repaint restyle the
// page: half of a plot's repaint time (CPU profile of a slider drag, Bokeh 3.9). Skipping
// rewrites that change nothing keeps every style the same. Loaded once, with the page.
const dom = window.Bokeh && window.Bokeh.require ? window.Bokeh.require('core/dom') : null;
const sheet = dom && dom.InlineStyleSheet ? dom.InlineStyleSheet.prototype : null;
if (sheet && typeof sheet._update === 'function' && !sheet._update.skipsUnchanged) {
  const rewrite = sheet._update;
  sheet._update = function (css) {
    if (this.el.textContent !== css) rewrite.call(this, css);
  };
  sheet._update.skipsUnchanged = true;
}

export function render({ model, el }) {
  const box = document.createElement('div');
  box.className = 'gb-live';
  box.innerHTML = model.html;
  let tallest = 0;
  let rest = null;
  const hold = (height) => {
    tallest = height;
    box.style.minHeight = height + 'px';
  };
  const watcher = new ResizeObserver((entries) => {
    const height = Math.ceil(entries[entries.length - 1].borderBoxSize[0].blockSize);
    if (height > tallest) hold(height);
  });
  watcher.observe(box);
  const settle = () => {
    // idle now: shrink to the text's own height, still a whole number of pixels
    box.style.minHeight = '';
    hold(Math.ceil(box.getBoundingClientRect().height));
  };
  model.on('html', () => {
    box.innerHTML = model.html;
    clearTimeout(rest);
    rest = setTimeout(settle, REST_MS);
  });
  model.on('remove', () => { clearTimeout(rest); watcher.disconnect(); });
  el.appendChild(box);
}
"""

    def _update_model(self, events, msg, root, model, doc, comm):
        # A text change goes straight to the browser-side data model. Panel's generic path
        # first probes ``model.html`` to see whether it holds other models; the probe misses
        # (the text lives on ``model.data``) and Bokeh builds a did-you-mean message for the
        # miss, which cost 2-3 ms per box and update, a third of a slider step's server time.
        if set(msg) == {"html"} and not events.keys() & set(model.children):
            self._set_on_model(msg, root, model.data)  # marks the change as ours, not the browser's
            return
        super()._update_model(events, msg, root, model, doc, comm)


class HtmlBox:
    """HTML text laid out by Panel and updated cheaply.

    Parameters
    ----------
    css : str
        Style sheet for the box's own shadow root.
    width, height : int, optional
        Size in pixels; without a height the box grows with its text.
    max_width : int, optional
        Instead of a fixed width: fill the container's width, up to this many pixels.
    css_classes : sequence of str
        Classes on the box's element (tests locate boxes by them).
    name : str, optional
        Name of the component.
    margin : tuple
        Panel margin around the box.
    """

    def __init__(self, *, css: str = "", width: int | None = None, height: int | None = None,
                 css_classes=(), name: str | None = None, margin=(0, 5), max_width: int | None = None):
        options = {"width": width, "margin": margin, "css_classes": list(css_classes),
                   "stylesheets": [css] if css else []}
        if max_width is not None:  # as wide as its container allows, up to max_width
            options.update(width=None, max_width=max_width, sizing_mode="stretch_width")
        if height is not None:
            options["height"] = height
        if name is not None:
            options["name"] = name
        self.panel = LiveHtml(**options)

    @property
    def object(self) -> str:
        """The HTML shown."""
        return self.panel.html

    @object.setter
    def object(self, text: str) -> None:
        if text != self.panel.html:
            self.panel.html = text
