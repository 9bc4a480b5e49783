"""Serving the workbench: `gainboard serve` ends here.

The server listens on the loopback address unless told otherwise and serves
every script, style sheet and font itself (Panel's server mode), so the page
works in air-gapped labs. Each browser tab gets its own design state.
"""

from __future__ import annotations

import ipaddress
import logging
import socket
import sys

__all__ = ["serve_workbench", "pick_free_port", "workbench_url"]

log = logging.getLogger(__name__)


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


def _is_loopback(address: str) -> bool:
    if address == "localhost":
        return True
    try:
        return ipaddress.ip_address(address).is_loopback
    except ValueError:
        return False


def _allowed_origins(address: str, port: int) -> list[str]:
    """Pages allowed to open the live connection: only this server's own addresses."""
    if _is_loopback(address):
        hosts = {"127.0.0.1", "localhost", address if ":" not in address else f"[{address}]"}
    elif address in ("0.0.0.0", "::", ""):
        # Listening everywhere: allow this machine's names; other hosts must be listed explicitly.
        hosts = {"127.0.0.1", "localhost", socket.gethostname(), socket.getfqdn()}
    else:
        hosts = {address if ":" not in address else f"[{address}]", "127.0.0.1", "localhost"}
    return sorted(f"{host}:{port}" for host in hosts)


def serve_workbench(plant_path: str | None, address: str = "127.0.0.1", port: int = 0, show: bool = True) -> None:
    """Serve the workbench until interrupted (blocking).

    Parameters
    ----------
    plant_path : str or None
        A TOML plant file or the name of a bundled plant; None opens the first
        bundled plant.
    address : str
        Address to listen on; loopback (127.0.0.1) by default so only this
        machine can connect.
    port : int
        TCP port; 0 picks a free one.
    show : bool
        Open a browser tab on start.

    Notes
    -----
    Prints ``gainboard serving at http://ADDRESS:PORT/`` on standard output once
    the port is bound (scripts and tests read it).

    Raises
    ------
    PlantError
        If the plant cannot be loaded (checked before the server starts).
    """
    import panel as pn
    from panel.io.server import get_server

    from .state import plant_from_reference
    from .workbench import build_workbench, configure_panel

    plant, label, text = plant_from_reference(plant_path)  # refuse a broken plant before serving
    configure_panel()
    if port == 0:
        port = pick_free_port(address)
    if not _is_loopback(address):
        print(
            f"gainboard: listening on {address}, reachable from other machines; the workbench has no login. "
            "Use the default loopback address unless the network is trusted.",
            file=sys.stderr,
        )

    def session():
        return build_workbench(plant, plant_label=label, plant_text=text)

    server = get_server(
        {"/": session},
        port=port,
        address=address,
        websocket_origin=_allowed_origins(address, port),
        show=show,
        start=False,
        verbose=False,
        title="gainboard workbench",
    )
    print(f"gainboard serving at {workbench_url(address, server.port)}", flush=True)
    server.start()
    try:
        server.io_loop.start()
    except KeyboardInterrupt:
        pass
    finally:
        pn.state.kill_all_servers()
