"""Benchmark: gestures → redrawn plots in a real browser, beside the floor page measured in the same run.

Not a test (nothing is asserted): run it as a script and read the numbers.

    python tests/benchmarks/browser_latency.py [PLANT ...] [--moves 40] [--no-floor]

It starts `gainboard serve` on a free loopback port for each plant (and the floor page,
floor_app.py: one slider redrawing one 2 000-point plot, the least a Panel page can do
here), opens it in headless Debian chromium (1366×768) and measures, in the page's own
clock:

- first page usable: from the start of navigation to the response plot holding its data
  (plots drawn), and the bytes the page transferred (HTTP resources, and the websocket
  frames received until then, from Chromium's DevTools protocol);
- slider drag: the mouse holds the first gain slider (the large slider of the selected
  entry for a K shown as a matrix) and moves a few pixels at a time; latency = from the
  pointer move to the second animation frame after the response plot's data changed;
  also the websocket bytes and frames received per step;
- arrow keys: ArrowRight / ArrowLeft on the focused slider handle (fine nudges, each a
  gesture step), same end point;
- pole drag: the mouse drags the closed-loop pole with the largest imaginary part a few
  pixels at a time (every entry of K changes each step: pole assignment).

Each step waits for its redraw before the next, so the numbers are latencies, not
throughput. Prints median and 95th percentile in milliseconds and each median and 95th
percentile as a ratio to the floor page's slider drag of the same run. The first moves of
the first drag are reported apart (warm-up).
"""

from __future__ import annotations

import argparse
import statistics
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "browser"))

from workbench_server import CHROMIUM, CHROMIUM_ARGS, VIEWPORT, RunningServer  # noqa: E402

DEFAULT_PLANTS = ["cart_pendulum", "flexure_stage_xy"]
FLOOR = "floor page"

# Installs the page-side clock: pointer moves and key presses start it, the next change of the
# response plot's data followed by two animation frames stops it.
INSTALL_PROBE = """() => {
    window.__latencies = [];
    window.__start = null;
    const start = () => { if (window.__start === null) window.__start = performance.now(); };
    document.addEventListener('pointermove', e => { if (e.buttons) start(); }, true);
    document.addEventListener('keydown', start, true);
    const source = Bokeh.documents[0].get_model_by_name('response_output_traces')
        || Bokeh.documents[0].get_model_by_name('response_outputs').renderers[0].data_source;  // the floor page
    source.change.connect(() => {
        if (window.__start === null) return;
        const began = window.__start;
        window.__start = null;
        requestAnimationFrame(() => requestAnimationFrame(() => window.__latencies.push(performance.now() - began)));
    });
}"""

# The response plot holds data: the page is usable (its plots are drawn once this holds).
PLOTS_DRAWN = """() => {
    if (!window.Bokeh || !Bokeh.documents.length) return false;
    const source = Bokeh.documents[0].get_model_by_name('response_output_traces')
        || Bokeh.documents[0].get_model_by_name('response_outputs').renderers[0].data_source;  // the floor page
    if (!source) return false;
    const data = source.data;
    return Object.values(data).some(column => column.length > 0) ? performance.now() : false;
}"""

RESOURCE_BYTES = """() => performance.getEntriesByType('navigation').concat(performance.getEntriesByType('resource'))
    .reduce((total, entry) => total + (entry.transferSize || entry.encodedBodySize || 0), 0)"""

# Page position of the closed-loop pole with the largest imaginary part.
POLE_POSITION = """() => {
    const figure = Bokeh.documents[0].get_model_by_name('pole_map');
    const source = Bokeh.documents[0].get_model_by_name('closed_loop_poles');
    const view = Bokeh.index.find_one(figure);
    const box = view.canvas_view.el.getBoundingClientRect();
    const xs = Array.from(source.data.x), ys = Array.from(source.data.y);
    let best = 0;
    ys.forEach((y, i) => { if (y > ys[best]) best = i; });
    return [box.left + view.frame.x_scale.compute(xs[best]), box.top + view.frame.y_scale.compute(ys[best])];
}"""

#: Moves at the start of the first drag reported apart: first runs of code paths in browser and server.
WARM_UP_MOVES = 5
#: Poll on a timer, not on animation frames (Playwright's default keeps the page painting every 16 ms).
POLL_MS = 25


def percentile(values: list[float], fraction: float) -> float:
    """Nearest-rank percentile (common practice, no source)."""
    ordered = sorted(values)
    rank = max(1, min(len(ordered), round(fraction * len(ordered) + 0.5)))
    return ordered[rank - 1]


class FrameCounter:
    """Websocket frames and bytes the page receives (Chromium DevTools protocol)."""

    def __init__(self, page):
        self.frames = 0
        self.bytes = 0
        session = page.context.new_cdp_session(page)
        session.send("Network.enable")
        session.on("Network.webSocketFrameReceived", self._received)

    def _received(self, event) -> None:
        self.frames += 1
        self.bytes += len(event.get("response", {}).get("payloadData", ""))

    def mark(self) -> tuple[int, int]:
        return self.frames, self.bytes


def timed_steps(page, count: int, act, timeout_ms: int = 60_000) -> list[float]:
    """Latencies of ``count`` steps made by ``act(step)``, each waiting for its redraw.

    A step without a redraw within ``timeout_ms`` ends the gesture: the steps timed so far are returned.
    """
    from playwright.sync_api import TimeoutError as PlaywrightTimeout

    page.evaluate("() => { window.__latencies = []; window.__start = null; }")
    for step in range(count):
        act(step)
        try:
            page.wait_for_function(f"() => window.__latencies.length > {step}", timeout=timeout_ms, polling=POLL_MS)
        except PlaywrightTimeout:
            print(f"    (step {step + 1} of {count} was not redrawn within {timeout_ms / 1000:.0f} s; gesture ended)",
                  flush=True)
            break
    return list(page.evaluate("() => window.__latencies"))


def settle(page) -> None:
    page.wait_for_function("() => Bokeh.documents[0].is_idle", polling=POLL_MS)
    page.wait_for_timeout(1500)  # a gesture's pause and release evaluations land


def measure(browser, plant: str, moves: int, floor: bool = False) -> dict:
    launcher = [sys.executable, str(Path(__file__).resolve().parent / "floor_app.py")] if floor else None
    server = RunningServer(plant, launcher=launcher)
    results = {}
    try:
        context = browser.new_context(viewport=VIEWPORT)
        page = context.new_page()
        frames = FrameCounter(page)
        page.goto(server.url, wait_until="commit")
        usable = page.wait_for_function(PLOTS_DRAWN, timeout=120_000, polling=POLL_MS).json_value()
        results["first page usable (ms)"] = float(usable)
        results["first page bytes (HTTP)"] = int(page.evaluate(RESOURCE_BYTES))
        results["first page bytes (websocket)"] = frames.mark()[1]
        page.locator(".gb-pole-row").first.wait_for(state="attached", timeout=60_000)
        page.wait_for_function("() => Bokeh.documents.length > 0 && Bokeh.documents[0].is_idle", polling=POLL_MS)
        page.evaluate(INSTALL_PROBE)

        handle = page.locator(".gb-slider-1-1 .noUi-handle")
        box = handle.bounding_box()
        position = {"x": box["x"] + box["width"] / 2, "y": box["y"] + box["height"] / 2}
        page.mouse.move(position["x"], position["y"])
        page.mouse.down()

        def slider_step(step):
            position["x"] += 4 if (step // 10) % 2 == 0 else -4  # wander back and forth within the range
            page.mouse.move(position["x"], position["y"])

        results["warm-up"] = timed_steps(page, WARM_UP_MOVES, slider_step)
        before = frames.mark()
        drag = timed_steps(page, moves, lambda step: slider_step(step + WARM_UP_MOVES))
        after = frames.mark()
        page.mouse.up()
        results["slider drag"] = drag
        results["frames per drag step"] = (after[0] - before[0]) / moves
        results["bytes per drag step"] = (after[1] - before[1]) / moves
        settle(page)

        handle.focus()
        keys = max(moves // 2, 10)
        results["arrow keys"] = timed_steps(
            page, keys, lambda step: page.keyboard.press("ArrowRight" if (step // 5) % 2 == 0 else "ArrowLeft"))
        settle(page)

        if not floor:
            x, y = page.evaluate(POLE_POSITION)
            page.mouse.move(x, y)
            page.mouse.down()
            # past the browser's pan threshold first (a few pixels): only then does the drag reach the server
            page.mouse.move(x - 6, y + 3, steps=3)
            page.wait_for_timeout(1000)
            pole = {"x": x - 6, "y": y + 3}

            def pole_step(step):
                pole["x"] += -2 if (step // 8) % 2 == 0 else 2
                pole["y"] += 1 if (step // 8) % 2 == 0 else -1
                page.mouse.move(pole["x"], pole["y"])

            results["pole drag"] = timed_steps(page, max(moves // 2, 10), pole_step, timeout_ms=15_000)
            page.mouse.up()
            settle(page)
        context.close()
    finally:
        server.stop()
    return results


def report(name: str, values: list[float], floor: dict | None) -> None:
    if not values:
        print(f"  {name}: no samples")
        return
    median, p95 = statistics.median(values), percentile(values, 0.95)
    ratio = ""
    if floor and floor.get("slider drag"):
        floor_median, floor_p95 = statistics.median(floor["slider drag"]), percentile(floor["slider drag"], 0.95)
        ratio = f"   = {median / floor_median:.1f}× / {p95 / floor_p95:.1f}× the floor page's drag"
    print(f"  {name}: {len(values)} steps, median {median:.0f} ms, 95th percentile {p95:.0f} ms, "
          f"max {max(values):.0f} ms{ratio}")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("plants", nargs="*", default=DEFAULT_PLANTS, help="plant files or bundled plant names")
    parser.add_argument("--moves", type=int, default=40, help="slider moves to time (default 40)")
    parser.add_argument("--no-floor", action="store_true", help="skip the floor page")
    args = parser.parse_args(argv)
    from playwright.sync_api import sync_playwright

    with sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS, headless=True)
        floor = None if args.no_floor else measure(browser, DEFAULT_PLANTS[0], args.moves, floor=True)
        measured = {FLOOR: floor} if floor else {}
        for plant in args.plants:
            measured[plant] = measure(browser, plant, args.moves)
        browser.close()
    print_results(measured, floor)
    return 0


def print_results(measured: dict, floor: dict | None) -> None:
    for name, results in measured.items():
        print(f"{name}:")
        usable = results["first page usable (ms)"]
        ratio = f" = {usable / floor['first page usable (ms)']:.1f}× the floor page's" if floor and name != FLOOR else ""
        print(f"  first page usable (plots drawn): {usable:.0f} ms{ratio}; transferred "
              f"{results['first page bytes (HTTP)'] / 1e3:.0f} kB over HTTP + "
              f"{results['first page bytes (websocket)'] / 1e3:.0f} kB over the websocket")
        for gesture in ("slider drag", "arrow keys", "pole drag"):
            if gesture in results:
                report(gesture, results[gesture], floor)
        print(f"  per drag step: {results['frames per drag step']:.1f} websocket frames, "
              f"{results['bytes per drag step'] / 1e3:.1f} kB received")


if __name__ == "__main__":
    sys.exit(main())
