"""The workbench's look: palette, markers, page styles and number formatting.

The palette is our own: a warm paper background, slate ink, teal for the design
being edited, violet for the pinned comparison, ochre for the LQR comparison and
a sand-to-plum ramp for gain-graded loci. Poles are drawn as × and zeros as ○
(the textbook convention); everything else is chosen here for clarity.
"""

from __future__ import annotations

from .number_text import format_complex, format_gain_text, format_number

__all__ = [
    "PALETTE",
    "TRACE_COLOURS",
    "LOCUS_RAMP",
    "MARKERS",
    "PAGE_CSS",
    "TABLE_CSS",
    "SAFETY_CAUTION",
    "format_number",
    "format_complex",
    "format_gain_text",
    "trace_colour",
    "entry_symbol",
    "estimator_entry_symbol",
    "pole_time_text",
]

PALETTE = {
    "paper": "#f6f5f1",
    "panel": "#ffffff",
    "rule": "#d9d6cc",
    "ink": "#22303c",
    "muted": "#5d6b78",
    "accent": "#2f6f8f",
    "closed_loop": "#0b7a75",
    "estimator": "#c0392b",
    "open_loop": "#8a94a0",
    "pinned": "#8f6bb5",
    "lqr": "#b7791f",
    "zero": "#22303c",
    "fixed_frame": "#5d6b78",
    "arrow": "#1d4e89",
    "spec_region": "#cfe8d8",
    "unstable_region": "#f6dedb",
    "boundary": "#9aa5ae",
    "pass": "#2d7d46",
    "fail": "#b3261e",
    "limit_band": "#efe6d2",
    "interval_stable": "#6fb58a",
    "interval_unstable": "#e3a59c",
    "sampled_equivalent": "#1d4e89",
}

#: One colour per output or input trace, cycled when there are more.
TRACE_COLOURS = ("#0b7a75", "#c2484f", "#2e6fae", "#c98a1b", "#6b4c9a", "#4f7a3a", "#8a5a44")

#: Gain-graded locus colours, low gain (light sand) to high gain (deep plum).
LOCUS_RAMP = (
    "#f1d9a7", "#eec38a", "#eaa972", "#e38f62", "#d8765a",
    "#c86157", "#b34f58", "#9a425b", "#7f375b", "#632e55",
)

#: Bokeh marker settings for each kind of point on the pole map.
MARKERS = {
    "closed_loop": {"marker": "x", "size": 17, "line_width": 3.2},
    "open_loop": {"marker": "x", "size": 11, "line_width": 1.6},
    "pinned": {"marker": "x", "size": 14, "line_width": 2.2},
    "lqr": {"marker": "x", "size": 12, "line_width": 2.0},
    "estimator": {"marker": "diamond", "size": 15, "line_width": 2.0},
    "zero": {"marker": "circle", "size": 11, "line_width": 1.8},
    "fixed_frame": {"marker": "square", "size": 24, "line_width": 1.6},
    "sampled_equivalent": {"marker": "circle_x", "size": 11, "line_width": 1.4},
}

#: The caution shown on every screen (and in the page title bar region).
SAFETY_CAUTION = (
    "A gain designed on a linear model is only a starting point. Validate it on the real "
    "system with safe limits and working emergency stops before relying on it; local codes, "
    "functional-safety standards and licensed engineering practice take precedence over this tool."
)

PAGE_CSS = f"""
:root {{
  --gb-paper: {PALETTE['paper']};
  --gb-ink: {PALETTE['ink']};
  --gb-muted: {PALETTE['muted']};
  --gb-rule: {PALETTE['rule']};
  --gb-accent: {PALETTE['accent']};
}}
body {{ background: var(--gb-paper); color: var(--gb-ink); margin: 0; }}
.gb-header {{ display: flex; align-items: baseline; gap: 14px; }}
.gb-title {{ font-size: 19px; font-weight: 700; letter-spacing: 0.02em; color: var(--gb-ink); }}
.gb-plant-name {{ font-size: 15px; font-weight: 600; color: var(--gb-accent); }}
.gb-plant-summary {{ font-size: 13px; color: var(--gb-muted); }}
.gb-caution {{ border-left: 5px solid #c98a1b; background: #fbf3e2; padding: 4px 10px;
  font-size: 12px; line-height: 1.35; color: #4a3b1c; border-radius: 3px; }}
.gb-caution b {{ color: #6b4a0d; }}
.gb-message {{ padding: 5px 10px; font-size: 13px; border-radius: 3px; line-height: 1.35; }}
.gb-message-error {{ background: #fbe4e1; border-left: 5px solid {PALETTE['fail']}; color: #5c1510; }}
.gb-message-note {{ background: #e6f0f5; border-left: 5px solid {PALETTE['accent']}; color: #173847; }}
.gb-section {{ font-size: 12px; font-weight: 700; text-transform: uppercase; letter-spacing: 0.06em;
  color: var(--gb-muted); margin: 4px 0 2px 0; }}
.gb-entry-label {{ font-size: 13px; line-height: 1.25; }}
.gb-entry-label .gb-k {{ font-weight: 700; font-family: ui-monospace, monospace; }}
.gb-entry-label .gb-units {{ color: var(--gb-muted); font-size: 11.5px; }}
.gb-entry-selected {{ border-left: 4px solid {PALETTE['closed_loop']}; padding-left: 4px; }}
.gb-interval-text {{ font-size: 11.5px; color: var(--gb-muted); font-family: ui-monospace, monospace; }}
table.gb-table {{ border-collapse: collapse; font-size: 12.5px; width: 100%; }}
table.gb-table th {{ text-align: left; font-weight: 600; color: var(--gb-muted); border-bottom: 1px solid var(--gb-rule);
  padding: 3px 6px; }}
table.gb-table td {{ padding: 3px 6px; border-bottom: 1px solid #ece9e1; font-variant-numeric: tabular-nums; }}
table.gb-table td.num {{ text-align: right; font-family: ui-monospace, monospace; }}
.gb-pass {{ color: {PALETTE['pass']}; font-weight: 700; }}
.gb-fail {{ color: {PALETTE['fail']}; font-weight: 700; }}
.gb-fixed {{ color: {PALETTE['fixed_frame']}; font-style: italic; }}
.gb-legend {{ font-size: 11.5px; color: var(--gb-muted); line-height: 1.5; }}
.gb-legend span.sw {{ display: inline-block; width: 10px; height: 10px; margin: 0 3px 0 8px; vertical-align: middle;
  border-radius: 2px; }}
.gb-small {{ font-size: 12px; color: var(--gb-muted); }}
.gb-readout {{ font-family: ui-monospace, monospace; font-size: 12.5px; }}
"""


def entry_symbol(row: int, col: int) -> str:
    """The name of gain entry (row, col) as written in the app, counted from 1: ``k₁₂``.

    Examples
    --------
    >>> entry_symbol(0, 1)
    'k₁₂'
    >>> entry_symbol(9, 0)
    'k[10,1]'
    """
    subscripts = str.maketrans("0123456789", "₀₁₂₃₄₅₆₇₈₉")
    if row < 9 and col < 9:
        return f"k{str(row + 1).translate(subscripts)}{str(col + 1).translate(subscripts)}"
    return f"k[{row + 1},{col + 1}]"


def estimator_entry_symbol(row: int, col: int) -> str:
    """The name of estimator gain entry (row, col), counted from 1: ``l₂₁``.

    Examples
    --------
    >>> estimator_entry_symbol(1, 0)
    'l₂₁'
    """
    return "l" + entry_symbol(row, col)[1:]


def trace_colour(index: int) -> str:
    """Colour of the index-th output or input trace."""
    return TRACE_COLOURS[index % len(TRACE_COLOURS)]

#: Tables, headings and notes inside the workbench's text boxes (each box has its own shadow root).
TABLE_CSS = f"""
table.gb-table {{ border-collapse: collapse; font-size: 12.5px; width: 100%; }}
table.gb-table th {{ text-align: left; font-weight: 600; color: {PALETTE['muted']};
  border-bottom: 1px solid {PALETTE['rule']}; padding: 3px 6px; }}
table.gb-table td {{ padding: 3px 6px; border-bottom: 1px solid #ece9e1; }}
table.gb-table td.num {{ text-align: right; font-family: ui-monospace, monospace; white-space: nowrap; }}
.gb-pass {{ color: {PALETTE['pass']}; font-weight: 700; }}
.gb-fail {{ color: {PALETTE['fail']}; font-weight: 700; }}
.gb-unknown {{ color: {PALETTE['muted']}; font-style: italic; }}
.gb-fixed {{ color: {PALETTE['fixed_frame']}; font-style: italic; }}
.gb-heading {{ font-size: 12px; font-weight: 700; text-transform: uppercase; letter-spacing: 0.06em;
  color: {PALETTE['muted']}; margin: 8px 0 3px 0; }}
.gb-note {{ font-size: 12px; color: {PALETTE['ink']}; line-height: 1.45; }}
.gb-small {{ font-size: 11.5px; color: {PALETTE['muted']}; }}
"""


def pole_time_text(description, digits: int = 4) -> str:
    """How fast a pole's mode decays or grows: its time constant, or for an unstable pole its growth time.

    The time constant −1/Re s is the time to decay by a factor e; a pole with Re s > 0 has
    none, and shows instead the time to GROW by a factor e, 1/Re s (s: the pole, or ln(z)/T
    for a sampled one), labelled so. A pole with Re s = 0 neither decays nor grows.

    Examples
    --------
    >>> from types import SimpleNamespace as Pole
    >>> pole_time_text(Pole(time_constant=0.5, equivalent_continuous=complex(-2, 0)))
    '0.5'
    >>> pole_time_text(Pole(time_constant=float("inf"), equivalent_continuous=complex(0.8, 3)))
    'grows ×e in 1.25'
    >>> pole_time_text(Pole(time_constant=float("inf"), equivalent_continuous=complex(0, 3)))
    'neither decays nor grows'
    """
    import math

    tau = float(description.time_constant)
    if math.isfinite(tau):
        return format_number(tau, digits)
    growth = complex(description.equivalent_continuous).real
    if growth > 0 and math.isfinite(growth):
        return f"grows ×e in {format_number(1.0 / growth, digits)}"
    return "neither decays nor grows"
