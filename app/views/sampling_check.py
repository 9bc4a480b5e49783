"""The time base: the emulation check of a continuous K at a sample time, and the explicit move to the z-plane.

Checking a sample time never changes the design: the evaluation brings the sampled loop
(the continuous K held by a ZOH between samples) and this view shows its verdict, the
largest stable sample time, its z-plane poles with their s-plane equivalents and its
margins. Two buttons then make the z-plane the design's time domain — from the sampled
equivalent of K, or as a redesign — and undo goes back. Every number comes from the
evaluation (``evaluation.emulation``); the callbacks only call the state.
"""

from __future__ import annotations

import math
from html import escape

import numpy as np
import panel as pn

from ..theme import TABLE_CSS, format_complex, format_number
from .html_box import HtmlBox

__all__ = ["SamplingCheckPanel", "emulation_html"]

WIDTH = 350


class SamplingCheckPanel:
    """Sample time, the emulation check and the z-plane choices of one session."""

    def __init__(self, state):
        self.state = state
        self.sample_time = pn.widgets.FloatInput(label="Sample time T (s)", value=0.01, start=0.0, width=120,
                                                 margin=(2, 5), css_classes=["gb-sample-time"])
        self.check_button = pn.widgets.Button(label="Check K sampled at T", width=170, margin=(20, 5, 2, 5),
                                              css_classes=["gb-check-sampling"],
                                              description="Run the current K through a zero-order hold at T; "
                                                          "the design is unchanged")
        self.keep_button = pn.widgets.Button(label="Continue on the z-plane from the sampled K", width=WIDTH - 10,
                                             margin=(2, 5), css_classes=["gb-continue-sampled"],
                                             description="Make the sampled plant current with the same K, held "
                                                         "between samples (undo goes back)")
        self.redesign_button = pn.widgets.Button(label="Redesign on the z-plane", width=180, margin=(2, 5),
                                                 css_classes=["gb-redesign-sampled"],
                                                 description="Make the sampled plant current and start from its "
                                                             "own LQR gain (undo goes back)")
        self.close_button = pn.widgets.Button(label="Hide check", width=100, margin=(2, 5))
        self.continuous_button = pn.widgets.Button(label="Back to continuous", width=150, margin=(2, 5),
                                                   css_classes=["gb-back-continuous"])
        self.result = HtmlBox(css=TABLE_CSS, width=WIDTH - 10, margin=(2, 5), name="sampling_check",
                              css_classes=["gb-sampling-check"])

        self.check_button.on_click(lambda event: self.state.check_sampling(_seconds(self.sample_time.value)))
        self.keep_button.on_click(lambda event: self.state.sample_plant(_seconds(self.sample_time.value)))
        self.redesign_button.on_click(
            lambda event: self.state.sample_plant(_seconds(self.sample_time.value), redesign=True))
        self.close_button.on_click(lambda event: self.state.stop_sampling_check())
        self.continuous_button.on_click(lambda event: self.state.restore_continuous())
        self.panel = pn.Column(
            pn.Row(self.sample_time, self.check_button, margin=0),
            self.result.panel,
            self.keep_button,
            pn.Row(self.redesign_button, self.close_button, margin=0),
            self.continuous_button,
            margin=0,
        )

    def refresh(self, evaluation) -> None:
        plant = evaluation.plant
        sampled = plant.is_sampled
        for button in (self.check_button, self.keep_button, self.redesign_button):
            button.disabled = sampled
        self.close_button.disabled = evaluation.emulation is None
        self.continuous_button.disabled = self.state.continuous_origin is None
        if sampled:
            self.sample_time.value = plant.sample_time
        elif evaluation.emulation is not None and self.sample_time.value != evaluation.emulation.sample_time:
            self.sample_time.value = evaluation.emulation.sample_time
        self.result.object = emulation_html(evaluation, self.state.continuous_origin)


def _seconds(value) -> float:
    """The typed sample time as a float (an empty box is 0, which the state refuses with a message)."""
    return float(value) if value is not None else 0.0


def emulation_html(evaluation, continuous_origin=None) -> str:
    """The emulation check in words and a table (or what to do to get one).

    ``continuous_origin``: the continuous plant a sampled one was made from here (None: none).
    """
    plant = evaluation.plant
    if plant.is_sampled:
        back = (" Undo (or “Back to continuous”) returns to the continuous design." if continuous_origin is not None
                else " The plant file is sampled itself, so there is no continuous design to go back to.")
        return (f'<div class="gb-note">The design runs on the z-plane, sampled every '
                f"{format_number(plant.sample_time)} s.{back}</div>")
    emulation = evaluation.emulation
    if emulation is None:
        return ('<div class="gb-note">Check what this continuous K does when a computer runs it: sampled every T '
                "seconds and held by a zero-order hold. The design stays as it is.</div>")
    check = emulation.check
    T = emulation.sample_time
    verdict = ('<span class="gb-pass">stable</span>' if emulation.stable
               else '<span class="gb-fail">UNSTABLE</span>')
    largest = emulation.largest_stable_sample_time
    if largest is None:
        reach = "The continuous design itself is unstable; fix it before choosing a sample time."
    elif math.isinf(largest):
        reach = f"No loss of stability found for T up to {format_number(check.searched_up_to, 3)} s."
    else:
        reach = f"Largest stable sample time: <b>{format_number(largest, 5)} s</b>."
    lines = [f"K held by a ZOH at T = {format_number(T)} s: the sampled loop is {verdict}. {reach}"]
    if check.closed_loop_bandwidth > 0:
        lines.append(f"Sampling runs at {format_number(check.sampling_ratio, 3)}× the fastest designed pole "
                     f"({format_number(check.closed_loop_bandwidth, 3)} rad/s); common practice, no source: 10–30×.")
    if emulation.stable:
        lines.append(f"Damping ratio lost at worst: {format_number(max(check.worst_damping_change, 0.0), 3)}.")
    margins = emulation.sampled.margins
    if margins is not None:
        lines.append(_margin_words(margins))
    rows = "".join(
        f'<tr class="gb-sampled-pole"><td class="num">{k}</td><td class="num">{escape(format_complex(z, 5))}</td>'
        f'<td class="num">{format_number(abs(z), 5)}</td><td class="num">{escape(format_complex(s, 4))}</td></tr>'
        for k, (z, s) in enumerate(zip(np.asarray(check.sampled_poles, complex),
                                       np.asarray(check.equivalent_continuous_poles, complex)), start=1)
    )
    table = ('<table class="gb-table"><tr><th>#</th><th>z-plane pole</th><th>|z|</th><th>equivalent s = ln(z)/T</th>'
             f"</tr>{rows}</table>")
    return ('<div class="gb-note gb-sampling-verdict">' + "<br>".join(lines) + "</div>" + table
            + '<div class="gb-small">The sampled loop’s responses are drawn over the continuous ones '
              "(Responses tab, dot-dashed).</div>")


def _margin_words(margins) -> str:
    parts = []
    if getattr(margins, "gain_margin_db_min", None) is not None and np.isfinite(margins.gain_margin_db_min):
        parts.append(f"gain {format_number(margins.gain_margin_db_min, 3)} dB")
    if getattr(margins, "phase_margin_deg", None) is not None and np.isfinite(margins.phase_margin_deg):
        parts.append(f"phase {format_number(margins.phase_margin_deg, 3)}°")
    if getattr(margins, "disk_margin", None) is not None and np.isfinite(margins.disk_margin):
        parts.append(f"1/‖S‖∞ at the input {format_number(margins.disk_margin, 3)}")
    return "Margins of the sampled loop: " + (", ".join(parts) if parts else "none found") + "."
