"""The standalone HTML design report draws its plots in a real browser with the network cut off."""

import numpy as np

from gainboard import core
from gainboard.app.design_file import Design
from gainboard.app.export import export_design

# Reference-cases.md case 1 (Ogata, Modern Control Engineering, 5th ed., Example 10-1, from memory).
OGATA = Design(
    plant=core.Plant(
        A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]],
        B=[[0.0], [0.0], [1.0]],
        C=[[1.0, 0.0, 0.0]],
        initial_state=np.array([0.1, 0.0, 0.0]),
    ),
    gain=[[199.0, 55.0, 8.0]],
)


def test_report_renders_its_plots_with_the_network_cut_off(tmp_path, browser):
    import panel  # noqa: F401 - the workbench imports Panel, which must not leak server paths into the report

    path = tmp_path / "report.html"
    path.write_text(export_design(OGATA, "html"), encoding="utf-8")
    blocked, errors = [], []
    page = browser.new_page()
    try:
        page.route(
            "**/*",
            lambda route: route.continue_()
            if route.request.url.startswith("file:")
            else (blocked.append(route.request.url), route.abort()),
        )
        page.on("pageerror", lambda error: errors.append(str(error)))
        page.goto(path.as_uri())
        # BokehJS draws each figure into canvases inside nested shadow roots once it has run; 7 figures
        # (pole map, outputs and inputs of three responses) make at least 7 canvases.
        page.wait_for_function(
            """() => { let count = 0;
                const visit = root => { count += root.querySelectorAll('canvas').length;
                    root.querySelectorAll('*').forEach(e => { if (e.shadowRoot) visit(e.shadowRoot); }); };
                visit(document); return count >= 7; }""",
            timeout=30_000,
        )
    finally:
        page.close()
    assert blocked == [] and errors == []
