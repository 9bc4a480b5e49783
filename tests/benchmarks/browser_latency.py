"""Benchmark: slider change → redrawn plots, measured inside the browser.

Not a test (nothing is asserted): run it as a script and read the numbers.

    python tests/benchmarks/browser_latency.py [PLANT] [--moves 40]

It starts `gainboard serve` on a free loopback port, opens the workbench in
headless Debian chromium (1366×768) and measures, in the page's own clock:

- drag: the mouse holds the first gain slider and moves a few pixels at a time;
  latency = from the pointer move to the second animation frame after the
  response plot's data changed (the plots are painted by then). The first few
  moves after the page has loaded are reported apart, as a warm-up;
- keyboard: ArrowRight on the focused slider handle, same end point (this path
  ends the gesture, so it includes the full evaluation with margins).

Each step waits for its redraw before the next, so the numbers are latencies,
not throughput. Prints median and 95th percentile in milliseconds. For scale,
``--floor`` times floor_app.py the same way: one slider redrawing one 2 000-point
plot, the least any Panel page can do on this machine.
"""

from __future__ import annotations

import argparse
import statistics
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "browser"))

from workbench_server import CHROMIUM, CHROMIUM_ARGS, VIEWPORT, RunningServer  # noqa: E402

DEFAULT_PLANT = str(Path(__file__).resolve().parents[1] / "data" / "third_order_reference.toml")

# Installs the page-side clock: pointer moves and key presses start it, the next
# change of the response plot's data followed by two animation frames stops it.
INSTALL_PROBE = """() => {
    window.__latencies = [];
    window.__start = null;
    const start = () => { if (window.__start === null) window.__start = performance.now(); };
    document.addEventListener('pointermove', e => { if (e.buttons) start(); }, true);
    document.addEventListener('keydown', start, true);
    const source = Bokeh.documents[0].get_model_by_name('response_outputs').renderers[0].data_source;
    source.change.connect(() => {
        if (window.__start === null) return;
        const began = window.__start;
        window.__start = null;
        requestAnimationFrame(() => requestAnimationFrame(() => window.__latencies.push(performance.now() - began)));
    });
}"""


#: Moves at the start of the first drag that are reported apart: the browser compiles its
#: drawing code and the server runs each code path for the first time there.
WARM_UP_MOVES = 5
#: Poll the page on a timer, not on animation frames: Playwright's default (requestAnimationFrame)
#: keeps the page rendering a frame every 16 ms, work a user's idle page never does, and it
#: competes with the redraw being measured. The latency itself is timed inside the page.
POLL_MS = 25


def percentile(values: list[float], fraction: float) -> float:
    """Nearest-rank percentile (common practice, no source)."""
    ordered = sorted(values)
    rank = max(1, min(len(ordered), round(fraction * len(ordered) + 0.5)))
    return ordered[rank - 1]


def report(name: str, values: list[float]) -> None:
    if not values:
        print(f"{name}: no samples")
        return
    print(f"{name}: {len(values)} samples, median {statistics.median(values):.0f} ms, "
          f"95th percentile {percentile(values, 0.95):.0f} ms, max {max(values):.0f} ms")


def measure(plant: str, moves: int, floor: bool = False) -> None:
    from playwright.sync_api import sync_playwright

    launcher = [sys.executable, str(Path(__file__).resolve().parent / "floor_app.py")] if floor else None
    server = RunningServer(plant, launcher=launcher)
    try:
        with sync_playwright() as playwright:
            browser = playwright.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS, headless=True)
            page = browser.new_context(viewport=VIEWPORT).new_page()
            page.goto(server.url)
            page.locator(".gb-pole-row").first.wait_for(state="attached", timeout=60_000)
            page.wait_for_function("() => Bokeh.documents.length > 0 && Bokeh.documents[0].is_idle")
            page.evaluate(INSTALL_PROBE)
            handle = page.locator(".gb-slider-1-1 .noUi-handle")
            box = handle.bounding_box()
            x, y = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2

            page.mouse.move(x, y)
            page.mouse.down()
            for step in range(WARM_UP_MOVES + moves):
                x += 4 if (step // 10) % 2 == 0 else -4  # wander back and forth within the range
                page.mouse.move(x, y)
                page.wait_for_function(f"() => window.__latencies.length > {step}", timeout=30_000, polling=POLL_MS)
            page.mouse.up()
            timed = list(page.evaluate("() => window.__latencies"))
            warm_up, drag = timed[:WARM_UP_MOVES], timed[WARM_UP_MOVES:]

            page.wait_for_function("() => Bokeh.documents[0].is_idle")
            page.wait_for_timeout(500)
            page.evaluate("() => { window.__latencies = []; window.__start = null; }")
            handle.focus()
            keys = max(moves // 2, 5)
            for step in range(keys):
                handle.press("ArrowRight" if (step // 5) % 2 == 0 else "ArrowLeft")
                page.wait_for_function(f"() => window.__latencies.length > {step}", timeout=30_000, polling=POLL_MS)
            keyboard = list(page.evaluate("() => window.__latencies"))
            browser.close()
    finally:
        server.stop()
    print("floor: one slider redrawing one plot (floor_app.py)" if floor else f"plant: {plant}")
    report(f"first {WARM_UP_MOVES} moves of the page's first drag (warm-up, not counted)", warm_up)
    report("slider drag → redrawn plots", drag)
    report("slider key → redrawn plots (full evaluation)", keyboard)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("plant", nargs="?", default=DEFAULT_PLANT, help="plant file or bundled plant name")
    parser.add_argument("--moves", type=int, default=40, help="slider moves to time (default 40)")
    parser.add_argument("--floor", action="store_true",
                        help="time floor_app.py (one slider, one plot) instead of the workbench")
    args = parser.parse_args()
    measure(args.plant, args.moves, floor=args.floor)


if __name__ == "__main__":
    main()
