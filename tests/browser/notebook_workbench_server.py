"""Test harness: serve the object that `gainboard.workbench(...)` returns (the notebook workbench) with Panel.

Accepts the arguments RunningServer passes (``serve PLANT --no-show --address A --port 0``) and
prints the same "gainboard serving at URL" line, so the browser fixtures work unchanged. Every
session gets ``gainboard.workbench(PLANT)`` — exactly what a notebook cell displays.
"""

from __future__ import annotations

import socket
import sys

import gainboard


def main(argv: list[str]) -> None:
    from panel.io.server import get_server

    plant = argv[1]
    address = argv[argv.index("--address") + 1] if "--address" in argv else "127.0.0.1"
    with socket.socket() as probe:
        probe.bind((address, 0))
        port = probe.getsockname()[1]
    server = get_server({"/": lambda: gainboard.workbench(plant)}, port=port, address=address,
                        websocket_origin=[f"{address}:{port}"], show=False, start=False, verbose=False)
    print(f"gainboard serving at http://{address}:{port}/", flush=True)
    server.start()
    server.io_loop.start()


if __name__ == "__main__":
    main(sys.argv[1:])
