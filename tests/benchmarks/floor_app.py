"""The framework floor for the browser benchmark: one slider redrawing one plot, nothing else.

Not part of gainboard. `browser_latency.py --floor` serves it in place of the
workbench and times it the same way, so the workbench's slider-to-redraw latency
can be read against what Panel and Bokeh need for the smallest possible update on
this machine (with the same websocket setting as the workbench). It accepts the arguments of `gainboard serve` (and ignores the plant)
and prints the same "serving at" line, so the same harness starts it.

The page has what the harness looks for: a slider in the class ``gb-slider-1-1``, a
plot named ``response_outputs`` whose line has 2 000 points (like a response), and
an element of class ``gb-pole-row`` to say it has loaded.
"""

from __future__ import annotations

import argparse
import socket
import sys

import numpy as np
import panel as pn
from bokeh.models import ColumnDataSource
from bokeh.plotting import figure

from gainboard.app.server import send_small_messages_at_once

TIME = np.linspace(0.0, 10.0, 2000)


class PromptSlider(pn.widgets.FloatSlider):
    _debounce = 0  # as the workbench's sliders: no 50 ms wait before the server sees a move


def build_page():
    slider = PromptSlider(start=0.1, end=10.0, value=2.0, step=0.01, width=320, css_classes=["gb-slider-1-1"])
    source = ColumnDataSource({"t": TIME, "y": np.exp(-0.3 * TIME) * np.cos(2.0 * TIME)})
    plot = figure(width=460, height=190, name="response_outputs", toolbar_location=None)
    plot.line("t", "y", source=source)

    def redraw(event):
        source.data = {"t": TIME, "y": np.exp(-0.3 * TIME) * np.cos(float(event.new) * TIME)}

    slider.param.watch(redraw, "value")
    marker = pn.pane.HTML('<div class="gb-pole-row">floor app</div>')
    return pn.Column(slider, pn.pane.Bokeh(plot), marker)


def free_port(address: str) -> int:
    with socket.socket() as probe:
        probe.bind((address, 0))
        return probe.getsockname()[1]


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("command")  # "serve", as for gainboard
    parser.add_argument("plant", nargs="?")
    parser.add_argument("--no-show", action="store_true")
    parser.add_argument("--address", default="127.0.0.1")
    parser.add_argument("--port", type=int, default=0)
    args, _ = parser.parse_known_args(argv)
    send_small_messages_at_once()  # the same websocket setting as `gainboard serve`
    port = args.port or free_port(args.address)
    server = pn.serve(build_page, address=args.address, port=port, show=False, start=False,
                      websocket_origin=[f"{args.address}:{port}"])
    print(f"gainboard serving at http://{args.address}:{port}/", flush=True)
    server.start()
    server.io_loop.start()
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
