"""The top of the page: title and status line, the safety caution, the message bar and the restore offer."""

from __future__ import annotations

from html import escape

import panel as pn

from ..theme import PALETTE, SAFETY_CAUTION
from .html_box import HtmlBox

__all__ = ["PageHeader", "HEADER_CSS", "PAGE_WIDTH", "MESSAGE_HEIGHT"]

PAGE_WIDTH = 1340
MESSAGE_HEIGHT = 34
#: Shown in the message slot when there is no message.
HINT = ("Move a slider or type a value to change one gain; drag a teal × on the pole map to place poles; "
        "every change can be undone.")

HEADER_CSS = f"""
.gb-header {{ display: flex; align-items: baseline; gap: 14px; white-space: nowrap; overflow: hidden; }}
.gb-title {{ font-size: 19px; font-weight: 700; letter-spacing: 0.02em; color: {PALETTE['ink']}; }}
.gb-plant-name {{ font-size: 15px; font-weight: 600; color: {PALETTE['accent']}; }}
.gb-plant-summary {{ font-size: 12.5px; color: {PALETTE['muted']}; overflow: hidden; text-overflow: ellipsis; }}
.gb-status {{ font-size: 12.5px; margin-left: auto; }}
.gb-pass {{ color: {PALETTE['pass']}; font-weight: 700; }}
.gb-fail {{ color: {PALETTE['fail']}; font-weight: 700; }}
.gb-caution {{ border-left: 5px solid #c98a1b; background: #fbf3e2; padding: 3px 10px; font-size: 12px;
  line-height: 1.35; color: #4a3b1c; border-radius: 3px; }}
.gb-caution b {{ color: #6b4a0d; }}
.gb-message {{ padding: 2px 10px; font-size: 12.5px; border-radius: 3px; line-height: 1.3; height: 30px;
  overflow-y: auto; box-sizing: border-box; display: flex; align-items: center; }}
.gb-message-none {{ border-left: 5px solid transparent; color: {PALETTE['muted']}; font-size: 12px; }}
.gb-message-error {{ background: #fbe4e1; border-left: 5px solid {PALETTE['fail']}; color: #5c1510; }}
.gb-message-note {{ background: #e6f0f5; border-left: 5px solid {PALETTE['accent']}; color: #173847; }}
.gb-message-offer {{ background: #eef3e6; border-left: 5px solid {PALETTE['pass']}; color: #1f3a1a; }}
.gb-room {{ font-size: 12.5px; color: {PALETTE['ink']}; background: #e6f0f5; border-radius: 3px; padding: 1px 8px;
  overflow: hidden; text-overflow: ellipsis; }}
.gb-room b {{ color: {PALETTE['accent']}; }}
@media (max-width: 800px) {{ .gb-plant-summary {{ display: none; }} }}  /* narrow: title, plant and status */
"""


class PageHeader:
    """Title, plant, design status (and the live room), the caution, messages and the restore offer.

    Parameters
    ----------
    state : DesignState
    on_restore, on_discard : callable
        Called when the restore offer is accepted or declined.
    """

    def __init__(self, state, *, on_restore, on_discard):
        self.state = state
        # The header lines fill the window's width (up to the three columns' width), so that a
        # narrow window wraps their text instead of cutting it off.
        self.header = HtmlBox(css=HEADER_CSS, max_width=PAGE_WIDTH, height=30, margin=(6, 10, 0, 10), name="header")
        self.caution = pn.pane.HTML(
            f'<div class="gb-caution" role="note"><b>Caution:</b> {escape(SAFETY_CAUTION)}</div>',
            max_width=PAGE_WIDTH, sizing_mode="stretch_width", margin=(2, 10), stylesheets=[HEADER_CSS],
            name="caution",
        )
        # The message slot keeps its height when empty so nothing moves under a dragging mouse.
        self.message = HtmlBox(css=HEADER_CSS, max_width=PAGE_WIDTH - 90, height=MESSAGE_HEIGHT,
                               margin=(2, 0, 2, 10), name="message")
        self.dismiss = pn.widgets.Button(label="Dismiss", width=75, margin=(2, 5), color="light", visible=False)
        self.dismiss.on_click(lambda event: state.clear_message())
        self.message_row = pn.Row(self.message.panel, self.dismiss, margin=0, height=MESSAGE_HEIGHT + 4,
                                  sizing_mode="stretch_width", max_width=PAGE_WIDTH + 20)
        # The offer to restore an autosaved design: shown at start only, above everything that moves.
        self.offer = HtmlBox(css=HEADER_CSS, max_width=PAGE_WIDTH - 260, height=MESSAGE_HEIGHT,
                             margin=(2, 0, 2, 10), name="restore_offer")
        self.restore_button = pn.widgets.Button(label="Restore it", color="success", width=95, margin=(2, 5))
        self.discard_button = pn.widgets.Button(label="Discard it", width=90, margin=(2, 5))
        self.restore_button.on_click(lambda event: on_restore())
        self.discard_button.on_click(lambda event: on_discard())
        self.offer_row = pn.Row(self.offer.panel, self.restore_button, self.discard_button, margin=0,
                                height=MESSAGE_HEIGHT + 4, visible=False, sizing_mode="stretch_width",
                                max_width=PAGE_WIDTH + 20)
        self.panels = [self.header.panel, self.caution, self.offer_row, self.message_row]

    def refresh(self, evaluation, room_html: str = "") -> None:
        """The title line: plant, where it came from (or the live room) and whether the design is stable."""
        plant = evaluation.plant
        status = ['<span class="gb-pass">stable</span>' if evaluation.closed_loop.stable
                  else '<span class="gb-fail">on the boundary</span>' if evaluation.closed_loop.on_boundary
                  else '<span class="gb-fail">unstable</span>']
        report = evaluation.spec_report
        if report is not None and report.checks:
            status.append('<span class="gb-pass">specs met</span>' if report.all_passed
                          else '<span class="gb-fail">specs not met</span>')
        middle = room_html or (f'<span class="gb-plant-summary">{escape(self.state.plant_label)}</span>'
                               f'<span class="gb-plant-summary">{escape(plant.summary or "")}</span>')
        revision = self.state.revision
        self.header.object = (
            f'<div class="gb-header"><span class="gb-title">gainboard</span>'
            f'<span class="gb-plant-name">{escape(plant.name)}</span>{middle}'
            f'<span class="gb-status" data-revision="{revision}">design {revision}: '
            f'{" · ".join(status)}</span></div>'
        )

    def show_message(self, text: str, kind: str) -> None:
        if not text or kind == "none":
            self.message.object = f'<div class="gb-message gb-message-none" role="status">{escape(HINT)}</div>'
            self.dismiss.visible = False
            return
        role = "alert" if kind == "error" else "status"
        self.message.object = f'<div class="gb-message gb-message-{kind}" role="{role}">{escape(text)}</div>'
        self.dismiss.visible = True

    def offer_restore(self, text: str) -> None:
        """Show the offer (``text`` is HTML-escaped here); "" hides it."""
        self.offer_row.visible = bool(text)
        if text:
            self.offer.object = f'<div class="gb-message gb-message-offer" role="status">{escape(text)}</div>'
