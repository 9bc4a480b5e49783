"""The Share tab: your name, live rooms and snapshot links.

A live room lets several people edit one design at once (see
:mod:`gainboard.app.rooms`); a snapshot link reopens the design as it is now in a
fresh session (see :mod:`gainboard.app.snapshot`). The links are built from the
address the page was opened with, so they work for whoever can reach the same
server (and, when the server asks for a login, has signed in).
"""

from __future__ import annotations

from html import escape

import panel as pn

from .html_box import HtmlBox
from ..theme import TABLE_CSS

__all__ = ["SharePanel"]

WIDTH = 350

_COPY_CODE = "navigator.clipboard && navigator.clipboard.writeText(source.value)"


class SharePanel:
    """Room and link controls of one session.

    Parameters
    ----------
    on_join : callable
        ``on_join(room_name)`` joins or starts a live room.
    on_leave : callable
        Leaves the room.
    on_rename : callable
        ``on_rename(name)`` changes the name shown to others.
    make_snapshot_link : callable
        Returns a link reopening the design as it is now ("" when it cannot be made).
    """

    def __init__(self, *, on_join, on_leave, on_rename, make_snapshot_link):
        self._make_snapshot_link = make_snapshot_link
        self.nickname = pn.widgets.TextInput(label="Your name (shown to others in a live room)", width=WIDTH - 10,
                                             margin=(2, 5), max_length=40, css_classes=["gb-nickname"])
        self.room_name = pn.widgets.TextInput(label="Live room name", placeholder="for example lab-review",
                                              width=190, margin=(2, 5), max_length=40, css_classes=["gb-room-name"])
        self.join_button = pn.widgets.Button(label="Join", color="primary", width=70, margin=(20, 5, 2, 5))
        self.leave_button = pn.widgets.Button(label="Leave", width=70, margin=(20, 5, 2, 0), disabled=True)
        self.room_status = HtmlBox(css=TABLE_CSS, width=WIDTH - 10, margin=(2, 5), name="room_status")
        self.room_link = pn.widgets.TextInput(label="Link to this room", value="", width=WIDTH - 10, margin=(2, 5),
                                              css_classes=["gb-room-link"], visible=False)
        self.copy_room_link = pn.widgets.Button(label="Copy room link", width=130, margin=(2, 5), visible=False)
        self.copy_room_link.js_on_click(args={"source": self.room_link}, code=_COPY_CODE)
        self.snapshot_button = pn.widgets.Button(label="Make snapshot link", color="primary", width=150,
                                                 margin=(2, 5))
        self.snapshot_link = pn.widgets.TextAreaInput(
            label="Snapshot link (plant, K and specs as they are now)", value="", height=84, width=WIDTH - 10,
            margin=(2, 5), css_classes=["gb-snapshot-link"],
            stylesheets=[":host textarea { font-family: ui-monospace, monospace; font-size: 11px; word-break: break-all; }"],
        )
        self.copy_snapshot = pn.widgets.Button(label="Copy snapshot link", width=150, margin=(2, 5))
        self.copy_snapshot.js_on_click(args={"source": self.snapshot_link}, code=_COPY_CODE)

        self.nickname.param.watch(lambda event: on_rename(event.new), "value")
        self.join_button.on_click(lambda event: on_join(self.room_name.value))
        self.leave_button.on_click(lambda event: on_leave())
        self.snapshot_button.on_click(lambda event: self._make_snapshot())

        heading = lambda text: pn.pane.HTML(f'<div class="gb-heading">{text}</div>',  # noqa: E731
                                            stylesheets=[TABLE_CSS], margin=(4, 5, 0, 5))
        small = lambda text: pn.pane.HTML(f'<div class="gb-small">{text}</div>',  # noqa: E731
                                          stylesheets=[TABLE_CSS], width=WIDTH - 10, margin=(2, 5))
        self.panel = pn.Column(
            heading("you"),
            self.nickname,
            heading("live room"),
            small("Everyone in a room sees the same plant, K, specs and notes, and every change at once; "
                  "the last change wins and the header shows who made it. Your selected entry, pinned design "
                  "and LQR comparison stay your own."),
            pn.Row(self.room_name, self.join_button, self.leave_button, margin=0),
            self.room_status.panel,
            self.room_link,
            self.copy_room_link,
            heading("snapshot link"),
            small("A link that opens this design (plant, K and specs; not the notes or history) in a fresh "
                  "session, for anyone who can reach this server."),
            self.snapshot_button,
            self.snapshot_link,
            self.copy_snapshot,
            margin=0,
        )
        self.show_room(None, [], "")

    def _make_snapshot(self) -> None:
        link = self._make_snapshot_link()
        if link:
            self.snapshot_link.value = link

    def show_nickname(self, name: str) -> None:
        if self.nickname.value != name:
            self.nickname.value = name

    def show_room(self, name: str | None, members: list[str], link: str) -> None:
        """Show the room this session is in (None: none) and who else is there."""
        in_room = name is not None
        self.leave_button.disabled = not in_room
        self.room_link.visible = in_room
        self.copy_room_link.visible = in_room
        if not in_room:
            self.room_status.object = '<div class="gb-small">Not in a room: this design is yours alone.</div>'
            return
        if self.room_name.value != name:
            self.room_name.value = name
        people = ", ".join(escape(member) for member in members) or "only you"
        self.room_status.object = (f'<div class="gb-note">In room <b>{escape(name)}</b> with: {people}.</div>')
        self.room_link.value = link
