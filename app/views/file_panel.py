"""The File tab: design files, K for the controller, the review report, notes and autosave.

Downloads are made when the button is pressed, from the design as it is then
(:meth:`DesignState.design`); nothing is written on the server except the autosave.
Opening a design file reads it as JSON with a size limit and validates every field
(:func:`gainboard.app.design_file.design_from_json`); it never runs code.
"""

from __future__ import annotations

import io
import logging
import re
import panel as pn

from gainboard import core

from ..design_file import MAX_DESIGN_FILE_BYTES, design_to_json
from ..export import EXPORT_FILE_SUFFIXES, export_design
from .html_box import HtmlBox
from ..theme import TABLE_CSS

__all__ = ["FilePanel", "file_stem", "EXPORT_CHOICES"]

log = logging.getLogger(__name__)

WIDTH = 350

#: The K export formats offered, in our words (the HTML report has its own button).
EXPORT_CHOICES = {
    "C header for firmware (.h)": "c",
    "JSON for tools and scripts (.json)": "json",
    "CSV for spreadsheets (.csv)": "csv",
    "Python snippet (.py)": "python",
}


def file_stem(label: str) -> str:
    """A file-name stem from a plant label: ``"cart_pendulum"`` stays, ``"my plant.toml"`` → ``"my-plant"``.

    Examples
    --------
    >>> file_stem("tilt_rig_sampled (ZOH, T = 0.01 s)")
    'tilt_rig_sampled-ZOH-T-0.01-s'
    >>> file_stem("")
    'design'
    """
    stem = re.sub(r"\.(toml|json)$", "", label.strip(), flags=re.IGNORECASE)
    stem = re.sub(r"[^A-Za-z0-9_.]+", "-", stem).strip("-.")
    return stem[:60] or "design"


class FilePanel:
    """File controls of one session.

    Parameters
    ----------
    state : DesignState
    report_error : callable
        ``report_error(text)`` shows an error to the user.
    """

    def __init__(self, state, report_error):
        self.state = state
        self._report_error = report_error
        self.download_design = pn.widgets.FileDownload(
            callback=self._design_file, filename="design.json", label="Download design file (.json)",
            color="primary", embed=False, width=WIDTH - 10, margin=(2, 5), css_classes=["gb-download-design"],
            description="The whole design: plant, K, specs, notes and gain history; open it again here",
        )
        self.open_design = pn.widgets.FileInput(accept=".json,application/json", width=WIDTH - 10, margin=(2, 5),
                                                css_classes=["gb-open-design"])
        self.export_format = pn.widgets.Select(label="Format for the controller", options=EXPORT_CHOICES,
                                               width=WIDTH - 10, margin=(2, 5), css_classes=["gb-export-format"])
        self.export_period = pn.widgets.FloatInput(
            label="Controller period T (s), to export a continuous design's compensator", value=0.001, start=0.0,
            width=WIDTH - 10, margin=(2, 5), css_classes=["gb-export-period"])
        self.download_export = pn.widgets.FileDownload(
            callback=self._export, filename="gains.h", label="Download K", embed=False, width=WIDTH - 10,
            margin=(4, 5), css_classes=["gb-download-export"],
            description="K with the state and input order, units and sample time",
        )
        self.download_report = pn.widgets.FileDownload(
            callback=self._report, filename="design-report.html", label="Download design report (.html)",
            embed=False, width=WIDTH - 10, margin=(4, 5), css_classes=["gb-download-report"],
            description="Plots and tables in one file that opens offline, for design reviews",
        )
        self.notes = pn.widgets.TextAreaInput(
            label="Notes for the team (saved with the design)", value="", height=110, width=WIDTH - 10,
            margin=(2, 5), css_classes=["gb-notes"], max_length=100_000,
        )
        self.keep_notes = pn.widgets.Button(label="Keep notes", width=110, margin=(2, 5))
        self.autosave_note = HtmlBox(css=TABLE_CSS, width=WIDTH - 10, margin=(2, 5), name="autosave_note")

        self.open_design.param.watch(self._design_chosen, "value")
        self.export_format.param.watch(lambda event: self._refresh_filenames(), "value")
        self.keep_notes.on_click(lambda event: self.state.set_notes(self.notes.value))
        self.state.param.watch(lambda event: self._show_notes(), "notes")

        heading = lambda text: pn.pane.HTML(f'<div class="gb-heading">{text}</div>',  # noqa: E731
                                            stylesheets=[TABLE_CSS], margin=(4, 5, 0, 5))
        small = lambda text: pn.pane.HTML(f'<div class="gb-small">{text}</div>',  # noqa: E731
                                          stylesheets=[TABLE_CSS], width=WIDTH - 10, margin=(2, 5))
        self.panel = pn.Column(
            heading("design file"),
            self.download_design,
            small(f"Open a design file (JSON, at most {MAX_DESIGN_FILE_BYTES // 1_000_000} MB):"),
            self.open_design,
            heading("the controller (K; with an estimator, the compensator)"),
            self.export_format,
            self.export_period,
            self.download_export,
            small("Every export names the state and input order, units, sample time and the control law, "
                  "and carries the caution above: validate K on the real system before relying on it."),
            heading("design review"),
            self.download_report,
            heading("notes"),
            self.notes,
            self.keep_notes,
            heading("autosave"),
            self.autosave_note.panel,
            margin=0,
        )

    # -- downloads (run when a button is pressed) ---------------------------------------------

    def _produce(self, what: str, make):
        try:
            return io.StringIO(make())
        except core.GainboardError as error:
            self._report_error(f"Could not {what}: {error}")
            raise
        except Exception as error:
            self._report_error(f"Could not {what}: unexpected {type(error).__name__}: {error}")
            raise

    def _design_file(self):
        return self._produce("write the design file", lambda: design_to_json(self.state.design()))

    def _export(self):
        chosen = self.export_format.value
        # a compensator of a continuous design runs at the controller's period (the file says how it was sampled)
        period = (float(self.export_period.value) if self.state.estimator is not None and not self.state.plant.is_sampled
                  and chosen in ("c", "json", "python") else None)
        return self._produce("export the controller", lambda: export_design(self.state.design(), chosen,
                                                                          sample_time=period))

    def _report(self):
        return self._produce("write the design report", lambda: export_design(self.state.design(), "html"))

    # -- opening -------------------------------------------------------------------------------

    def _design_chosen(self, event) -> None:
        if event.new:
            self.state.load_design_bytes(event.new, self.open_design.filename or "uploaded design file")

    # -- refreshing ----------------------------------------------------------------------------

    def _refresh_filenames(self) -> None:
        stem = file_stem(self.state.plant_label or self.state.plant.name)
        self.download_design.filename = f"{stem}-design.json"
        self.download_export.filename = f"{stem}-gains{EXPORT_FILE_SUFFIXES[self.export_format.value]}"
        self.download_report.filename = f"{stem}-report.html"

    def _show_notes(self) -> None:
        if self.notes.value != self.state.notes:
            self.notes.value = self.state.notes

    def refresh(self, evaluation) -> None:
        self.export_period.visible = self.state.estimator is not None and not evaluation.plant.is_sampled
        self._refresh_filenames()
        self._show_notes()

    def show_autosave(self, text: str) -> None:
        """Show where and when the design was last autosaved (or why not)."""
        self.autosave_note.object = f'<div class="gb-small">{text}</div>'
