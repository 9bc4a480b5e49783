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

    _esm = """
export function render({ model, el }) {
  const box = document.createElement('div');
  box.className = 'gb-live';
  box.innerHTML = model.html;
  model.on('html', () => { box.innerHTML = model.html; });
  el.appendChild(box);
}
"""


class HtmlBox:
    """HTML text laid out by Panel and updated cheaply.

    Parameters
    ----------
    css : str
        Style sheet for the box's own shadow root.
    width, height : int, optional
        Size in pixels; without a height the box grows with its text.
    css_classes : sequence of str
        Classes on the box's element (tests locate boxes by them).
    name : str, optional
        Name of the component.
    margin : tuple
        Panel margin around the box.
    """

    def __init__(self, *, css: str = "", width: int | None = None, height: int | None = None,
                 css_classes=(), name: str | None = None, margin=(0, 5)):
        options = {"width": width, "margin": margin, "css_classes": list(css_classes),
                   "stylesheets": [css] if css else []}
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
