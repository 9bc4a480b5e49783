"""The upload size limit, checked in the page before a file is sent.

Bokeh's file input reads the whole chosen file and sends it, base64-encoded, in one
message of the live connection. A file above the connection's message limit
(:data:`gainboard.app.server.MAX_MESSAGE_BYTES`) makes the server close the
connection, and the page died silently. So the page checks the size first: a small
script, run once the document is ready, wraps the file inputs' ``load_files`` so that
a file larger than :data:`MAX_UPLOAD_BYTES` is not read or sent; a message beside the
input says why. The server-side checks (design-file size, plant size, notes) stay:
this only spares the connection.
"""

from __future__ import annotations

from .design_file import MAX_DESIGN_FILE_BYTES

__all__ = ["MAX_UPLOAD_BYTES", "UPLOAD_GUARD_SCRIPT", "guard_uploads"]

#: Largest file the page sends (the design-file limit; plant files are far smaller).
MAX_UPLOAD_BYTES = MAX_DESIGN_FILE_BYTES

#: Wraps FileInputView.prototype.load_files (BokehJS): a file above ``limit`` bytes is refused in the page.
UPLOAD_GUARD_SCRIPT = """
if (!window.gainboardUploadGuard) {
  window.gainboardUploadGuard = true;
  const megabytes = (bytes) => (bytes / 1e6).toFixed(bytes < 1e7 ? 1 : 0);
  const show = (view, text) => {
    let note = view.gainboard_note;
    if (note == null) {
      note = document.createElement("div");
      note.className = "gb-upload-refused";
      note.setAttribute("role", "alert");
      note.style.cssText = "color:#7a1d16;background:#fbe4e1;font-size:12px;padding:2px 6px;margin-top:2px;" +
        "white-space:normal;overflow-wrap:anywhere;";
      view.input_el.insertAdjacentElement("afterend", note);
      view.gainboard_note = note;
    }
    note.textContent = text;
    note.style.display = text ? "block" : "none";
  };
  const patched = new Set();
  for (const doc of Bokeh.documents) {
    for (const model of doc._all_models.values()) {
      if (model.type !== "FileInput") continue;
      const view = Bokeh.index.find_one(model);
      if (view == null) continue;
      const prototype = Object.getPrototypeOf(view);
      if (patched.has(prototype) || typeof prototype.load_files !== "function") continue;
      patched.add(prototype);
      const load_files = prototype.load_files;
      prototype.load_files = async function (files) {
        const too_large = Array.from(files).filter((file) => file.size > limit);
        if (too_large.length > 0) {
          const file = too_large[0];
          this.input_el.value = "";
          show(this, `${file.name} has ${megabytes(file.size)} MB, over the ${megabytes(limit)} MB limit: not sent.`);
          return;
        }
        show(this, "");
        return load_files.call(this, files);
      };
    }
  }
}
"""


def guard_uploads(document) -> None:
    """Install the size check on ``document``'s file inputs once the page is ready in the browser."""
    from bokeh.models import CustomJS

    document.js_on_event("document_ready", CustomJS(args={"limit": MAX_UPLOAD_BYTES}, code=UPLOAD_GUARD_SCRIPT))
