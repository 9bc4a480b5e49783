"""Serving the workbench: `gainboard serve` ends here.

The server listens on the loopback address unless told otherwise and serves
every script, style sheet and font itself (Panel's server mode), so the page
works in air-gapped labs. Each browser tab gets its own design state, unless it
joins a live room (``?room=NAME``, see :mod:`gainboard.app.rooms`).

Who may connect (see :mod:`gainboard.app.access`): on the loopback address no
login is asked for; any other address needs a password or a generated access
token, or the server refuses to start. Live connections are accepted only from
pages served under this server's own host names (the allowed websocket origins),
plus any given with ``allow_websocket_origin``.

Several server processes: each ``gainboard serve`` is independent. Give them the
same cookie secret (``--cookie-secret-file`` or ``GAINBOARD_COOKIE_SECRET``) and a
sign-in on one is accepted by the others reached under the same host name; snapshot
links work on any of them; autosave files go to one data folder per user. Live rooms
are held in the memory of one process: everyone in a room must open the same
server (the same port), so run one process per team or project.
"""

from __future__ import annotations

import gc
import logging
import socket
import sys

from .autosave import default_autosave_folder, remove_old_autosaves
from .access import AccessSettings, WorkbenchLogin, access_settings, is_loopback, name_from_cookie, share_url
from .request_guard import guard_application
from .upload_guard import guard_uploads

__all__ = ["serve_workbench", "build_server", "pick_free_port", "workbench_url", "allowed_origins",
           "MAX_MESSAGE_BYTES"]

log = logging.getLogger(__name__)

#: Largest message a page may send over its live connection (bounds uploads: a design file of
#: 8 MB arrives base64-encoded, about 10.7 MB).
MAX_MESSAGE_BYTES = 12_000_000


def send_small_messages_at_once() -> None:
    """Turn off Nagle's algorithm on the workbench's live connections (idempotent).

    Tornado leaves it on and neither Bokeh nor Panel turns it off. A plot update
    is a burst of small websocket frames; with Nagle's algorithm the frames after
    the first wait for the browser's delayed acknowledgement, 30-40 ms on Linux: a
    one-slider, one-plot Panel page took 69 ms from slider to redrawn plot, 36 ms
    without it (tests/benchmarks/browser_latency.py --floor, this machine). Tornado's
    own documentation recommends set_nodelay(True) for interactive websockets.
    """
    from bokeh.server.views.ws import WSHandler

    if getattr(WSHandler.open, "sends_at_once", False):
        return
    opened = WSHandler.open

    def open_without_delay(self, *args, **kwargs):
        self.set_nodelay(True)
        return opened(self, *args, **kwargs)

    open_without_delay.sends_at_once = True
    WSHandler.open = open_without_delay


def keep_garbage_collection_short() -> None:
    """Collect, then exempt everything made so far (libraries, the app) from later collections.

    Python's full collection walks every tracked object: about 220 000 with one open
    workbench, 100-250 ms here, and when it fell in the middle of a slider drag that step
    took that much longer (seen as the slowest steps of the browser benchmark). What
    exists once the server is built lives as long as the process, so freezing it loses
    nothing; each new page is collected once while it loads, so its own objects do not
    set off a full collection during the first drag.
    """
    gc.collect()
    gc.freeze()


def pick_free_port(address: str = "127.0.0.1") -> int:
    """Ask the operating system for a free TCP port on ``address``."""
    family = socket.AF_INET6 if ":" in address else socket.AF_INET
    with socket.socket(family, socket.SOCK_STREAM) as probe:
        probe.bind((address, 0))
        return probe.getsockname()[1]


def workbench_url(address: str, port: int) -> str:
    """The address a browser should open, e.g. ``http://127.0.0.1:5006/``."""
    host = f"[{address}]" if ":" in address else address
    return f"http://{host}:{port}/"


def _host_with_port(host: str, port: int) -> str:
    host = f"[{host}]" if ":" in host and not host.startswith("[") else host
    return f"{host}:{port}"


def _this_machine_addresses() -> set[str]:
    """Host names and addresses other machines may use to reach this one."""
    names = {socket.gethostname(), socket.getfqdn()}
    try:
        for info in socket.getaddrinfo(socket.gethostname(), None):
            names.add(info[4][0])
    except OSError:
        pass
    return {name for name in names if name}


def allowed_origins(address: str, port: int, extra=()) -> list[str]:
    """Host:port pairs whose pages may open the live connection: only this server's own addresses.

    Parameters
    ----------
    address : str
        The listening address.
    port : int
        The listening port.
    extra : iterable of str
        More ``HOST`` or ``HOST:PORT`` entries (e.g. a DNS alias or a reverse proxy); a
        host without a port gets ``port``.

    Examples
    --------
    >>> allowed_origins("127.0.0.1", 5006)
    ['127.0.0.1:5006', 'localhost:5006']
    """
    hosts = {"127.0.0.1", "localhost"}
    if address in ("0.0.0.0", "::", ""):
        hosts |= _this_machine_addresses()  # listening everywhere: this machine's names and addresses
    elif address not in hosts:
        hosts.add(address)
    origins = {_host_with_port(host, port) for host in hosts}
    for entry in extra:
        entry = entry.strip()
        if not entry:
            continue
        has_port = entry.rsplit(":", 1)[-1].isdigit() and (not entry.count(":") > 1 or entry.startswith("["))
        origins.add(entry if has_port else _host_with_port(entry, port))
    return sorted(origins)


def server_key(address: str, port: int) -> str:
    """This server's name among the servers sharing a data folder (its listening address and port).

    Autosaves are kept per server: a restart on the same address and port finds its own.

    Examples
    --------
    >>> server_key("127.0.0.1", 5006)
    '127-0-0-1_5006'
    """
    return "".join(ch if ch.isalnum() else "-" for ch in (address or "all"))[:50] + f"_{port}"


def build_server(plant_path: str | None, *, address: str = "127.0.0.1", port: int = 0, show: bool = False,
                 access: AccessSettings | None = None, extra_origins=(), compress: bool = True):
    """Make (not start) the workbench server.

    Returns
    -------
    (server, port)
        The Bokeh server object (start it, then run its ``io_loop``) and the bound port.

    Raises
    ------
    PlantError
        If the plant cannot be loaded.
    """
    import panel as pn
    from panel.io.server import get_server
    from tornado.web import GZipContentEncoding

    from .state import plant_from_reference
    from .workbench import configure_panel

    plant, label, text = plant_from_reference(plant_path)  # refuse a broken plant before serving
    configure_panel()
    # A lost live connection (server stopped, network gone, a message too large) shows this
    # notice instead of leaving a page that silently stops answering.
    pn.config.disconnect_notification = ("The connection to the gainboard server was lost; reload the page. "
                                         "Your last design is in the autosave.")
    send_small_messages_at_once()
    if port == 0:
        port = pick_free_port(address)
    this_server = server_key(address, port)
    try:
        remove_old_autosaves(default_autosave_folder())  # designs untouched for KEEP_DAYS days
    except OSError as error:
        log.warning("could not clean up old autosaves: %s", error)

    def session():
        # Panel shows any exception escaping this function as a page with the full traceback (server
        # paths included); open_session_safely never lets one escape.
        page = open_session_safely(plant, plant_label=label, plant_text=text, access=access, server=this_server)
        guard_uploads(pn.state.curdoc)  # the upload size limit, checked in the page before sending
        gc.collect()  # see keep_garbage_collection_short: the page's own objects, once, while it loads
        return page

    options = {}
    if access is not None:
        options.update(auth_provider=WorkbenchLogin(access), cookie_secret=access.cookie_secret)
    server = get_server(
        {"/": session},
        port=port,
        address=address,
        websocket_origin=allowed_origins(address, port, extra_origins),
        show=show,
        start=False,
        verbose=False,
        title="gainboard workbench",
        websocket_max_message_size=MAX_MESSAGE_BYTES,
        **options,
    )
    guard_application(server._tornado, allowed_origins(address, port, extra_origins))
    if compress:
        server._tornado.transforms.insert(0, GZipContentEncoding)  # see COMPRESS_PAGES
    keep_garbage_collection_short()
    return server, server.port


def open_session_safely(plant, *, plant_label: str, plant_text: str, access: AccessSettings | None, server: str):
    """The page of one browser tab; any failure becomes a message on a working page, never a traceback."""
    import panel as pn

    from .autosave import autosave_owner
    from .workbench import open_session

    try:
        arguments = dict(pn.state.session_args or {})
        user = name_from_cookie(pn.state.user) if access is not None else None  # "<sign-in id>.<name>"
        return open_session(plant, plant_label=plant_label, plant_text=plant_text, arguments=arguments, user=user,
                            autosave_key=(server, autosave_owner(user, pn.state.cookies)))
    except Exception as error:  # the last guard: open_session already falls back to the server's plant
        log.exception("a page could not be opened")
        return pn.pane.HTML(
            "<h2>gainboard could not open this page</h2>"
            f"<p>{type(error).__name__}. The server log has the details; reload the page without the link "
            "to start from the server's plant.</p>")


def serve_workbench(plant_path: str | None, address: str = "127.0.0.1", port: int = 0, show: bool = True, *,
                    password_file=None, token: bool = False, cookie_secret_file=None, require_login: bool = False,
                    allow_websocket_origin=()) -> None:
    """Serve the workbench until interrupted (blocking).

    Parameters
    ----------
    plant_path : str or None
        A TOML plant file or the name of a bundled plant; None opens the first
        bundled plant.
    address : str
        Address to listen on; loopback (127.0.0.1) by default so only this
        machine can connect. Any other address needs a password or a token.
    port : int
        TCP port; 0 picks a free one.
    show : bool
        Open a browser tab on start.
    password_file : str or path, optional
        File whose first line is the team password (else ``$GAINBOARD_PASSWORD``).
    token : bool
        Generate an access token and print a link that signs in with it.
    cookie_secret_file : str or path, optional
        File whose first line signs the sign-in cookies (else ``$GAINBOARD_COOKIE_SECRET``,
        else a new secret per start).
    require_login : bool
        Ask for the password or token even on the loopback address.
    allow_websocket_origin : sequence of str
        Further ``HOST[:PORT]`` under which pages may be served (aliases, proxies).

    Notes
    -----
    Prints ``gainboard serving at http://ADDRESS:PORT/`` on standard output once
    the port is bound (scripts and tests read it); with a token, also
    ``gainboard sign-in link: http://HOST:PORT/login?token=...``.

    Raises
    ------
    AccessError
        Without a password or token on a non-loopback address (checked first).
    PlantError
        If the plant cannot be loaded (checked before the server starts).
    """
    import panel as pn

    access = access_settings(address, password_file=password_file, token=token,
                             cookie_secret_file=cookie_secret_file, require_login=require_login)
    server, bound_port = build_server(plant_path, address=address, port=port, show=show, access=access,
                                      extra_origins=allow_websocket_origin)
    print(f"gainboard serving at {workbench_url(address, bound_port)}", flush=True)
    if access is not None:
        ways = " or ".join(way for way, given in (("the password", access.password), ("the access token", access.token))
                           if given)
        print(f"gainboard: sign-in required ({ways})", flush=True)
        if access.token:
            print(f"gainboard sign-in link: {share_url(address, bound_port, access.token)}", flush=True)
    if not is_loopback(address):
        print(f"gainboard: listening on {address}; other machines can reach this server. Share the sign-in "
              "link only with your team.", file=sys.stderr, flush=True)
    server.start()
    try:
        server.io_loop.start()
    except KeyboardInterrupt:
        pass
    finally:
        pn.state.kill_all_servers()
