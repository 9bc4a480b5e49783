"""Sharing in a real browser: live rooms, snapshot links, design files, exports, sign-in and autosave restore.

The plant is reference case 1 of shared/reference-cases.md (tests/data/third_order_reference.toml):
Ogata, *Modern Control Engineering*, 5th ed., Example 10-1 (from memory): with K = [199, 55, 8]
the closed-loop poles are −2 ± 4j and −10. numpy's eigenvalues of A − BK are the independent
check of the poles each page shows; the standard library's JSON reader checks the downloaded file.
"""

from __future__ import annotations

import json
import shutil
import tempfile
from pathlib import Path
from urllib.parse import urlsplit

import pytest
from workbench_server import RunningServer

from gainboard import core
from pole_references import REFERENCE_POLES, matched_distance, numpy_closed_loop_poles

DATA = Path(__file__).resolve().parents[1] / "data"
PLANT_FILE = DATA / "third_order_reference.toml"
REFERENCE_GAIN = "[[199, 55, 8]]"
PASSWORD = "correct horse battery"


def test_two_pages_in_one_room_see_each_others_changes(open_page):
    ana = open_page("?room=review&name=Ana")
    ben = open_page("?room=review&name=Ben")
    ana.wait_for(lambda: "2 here" in ana.header_text(), "Ana's page to count Ben")
    ana.set_gain_text(REFERENCE_GAIN)
    # Ben's page follows: same K, the textbook poles, and who changed what.
    ben.wait_for(lambda: ben.gain_text() == "[[199, 55, 8]]", "Ben's page to show Ana's K")
    ben.wait_for(lambda: "Ana changed K" in ben.header_text(), "Ben's page to name Ana")
    shown = ben.settled_snapshot()["poles"]
    assert matched_distance(shown, REFERENCE_POLES) < 1e-9  # Ogata Example 10-1 (from memory)
    # Now Ben changes one entry; Ana's page shows it and names Ben.
    number = ben.page.locator(".gb-number-1-2 input")
    number.fill("60")
    number.press("Enter")
    ana.wait_for(lambda: ana.gain_text() == "[[199, 60, 8]]", "Ana's page to show Ben's k12")
    ana.wait_for(lambda: "Ben set k₁₂ = 60" in ana.header_text(), "Ana's page to name Ben")
    plant = core.load_plant_file(PLANT_FILE)
    settled = ana.settled_snapshot()
    assert matched_distance(settled["poles"], numpy_closed_loop_poles(plant, [[199, 60, 8]])) < 1e-8  # numpy eig
    ben.wait_for(lambda: "you set k₁₂ = 60" in ben.header_text(), "Ben's page to say the change was his")
    ana.screenshot("10-room-ana")
    ben.screenshot("11-room-ben")


def test_a_snapshot_link_reproduces_the_design_in_a_fresh_page(open_page):
    author = open_page()
    author.set_gain_text("[[199.123456789012, 55, 8]]")
    author.open_tab("Share")
    author.page.get_by_role("button", name="Make snapshot link").click()
    field = author.page.locator(".gb-snapshot-link textarea")
    link = author.wait_for(lambda: field.input_value(), "the snapshot link")
    assert link.startswith(author.server.url + "?design=g1.")
    author.screenshot("12-snapshot-link")
    reader = open_page(link.removeprefix(author.server.url))  # a fresh person opening the link
    assert reader.gain_text() == "[[199.123456789, 55, 8]]"
    reader.wait_for(lambda: "snapshot link" in reader.message(), "the note on opening a snapshot")
    plant = core.load_plant_file(PLANT_FILE)
    settled = reader.settled_snapshot()
    assert matched_distance(settled["poles"], numpy_closed_loop_poles(plant, [[199.123456789012, 55, 8]])) < 1e-8


def test_a_downloaded_design_file_and_exports_open_and_match(open_page, tmp_path):
    from gainboard.app.design_file import load_design
    from gainboard.app.export import export_design

    author = open_page()
    author.set_gain_text("[[199.123456789012, 55, 8]]")
    author.open_tab("File")
    author.page.locator(".gb-notes textarea").fill("tuned for the review")
    author.page.get_by_role("button", name="Keep notes").click()
    author.wait_for(lambda: "Notes saved" in author.message(), "the notes to be kept")
    with author.page.expect_download() as download_info:
        author.page.get_by_role("button", name="Download design file (.json)").click()
    download = download_info.value
    assert download.suggested_filename == "third_order_reference-design.json"
    saved = tmp_path / download.suggested_filename
    download.save_as(saved)
    document = json.loads(saved.read_text(encoding="utf-8"))  # the standard library's JSON reader
    assert document["gain"]["K"] == [[199.123456789012, 55.0, 8.0]]
    assert document["notes"] == "tuned for the review"
    # The C header offered for the controller is exactly the library's export of that design.
    author.page.locator(".gb-export-format select").select_option(label="C header for firmware (.h)")
    with author.page.expect_download() as download_info:
        author.page.get_by_role("button", name="Download K").click()
    header = download_info.value
    assert header.suggested_filename == "third_order_reference-gains.h"
    header_path = tmp_path / header.suggested_filename
    header.save_as(header_path)
    assert header_path.read_text(encoding="utf-8") == export_design(load_design(saved), "c")
    author.screenshot("13-file-tab")
    # Someone else opens the file in a fresh page.
    reader = open_page()
    reader.open_tab("File")
    before = reader.revision()
    reader.page.locator(".gb-open-design input[type=file]").set_input_files(str(saved))
    reader.wait_for_revision_above(before)
    reader.wait_for(lambda: reader.gain_text() == "[[199.123456789, 55, 8]]", "K of the opened file")
    reader.wait_for(lambda: "Opened third_order_reference-design.json" in reader.message(), "the note on opening")
    notes = reader.page.locator(".gb-notes textarea")
    reader.wait_for(lambda: notes.input_value() == "tuned for the review", "the design's notes")


@pytest.fixture(scope="module")
def guarded_server(server):
    """A second server that asks for a password, whose data folder holds an earlier session's autosave."""
    from gainboard.app.autosave import AutosaveStore
    from gainboard.app.design_file import Design

    from gainboard.app.autosave import autosave_owner
    from gainboard.app.server import server_key

    folder = Path(tempfile.mkdtemp(prefix="gainboard-guarded-"))
    plant = core.load_plant_file(PLANT_FILE)
    (folder / "password").write_text(PASSWORD + "\n")
    running = RunningServer(str(PLANT_FILE), options=["--require-login", "--password-file", str(folder / "password")],
                            environment={"GAINBOARD_DATA_DIR": str(folder)})
    # Ana's session of yesterday on this server (autosaves are kept per server and signed-in person).
    this_server = server_key("127.0.0.1", urlsplit(running.url).port)
    AutosaveStore.for_person(this_server, autosave_owner("Ana"), folder / "autosave").save(
        Design(plant=plant, gain=[[150.0, 40.0, 7.0]], notes="left from yesterday"))
    yield running
    running.stop()
    shutil.rmtree(folder, ignore_errors=True)


def test_signing_in_then_restoring_the_autosave_of_an_earlier_session(open_page, guarded_server):
    tab = open_page(target=guarded_server, load=False)
    page = tab.page
    # Not signed in: our own sign-in page, with the caution.
    page.locator("#gb-secret").wait_for(state="visible")
    assert "Validate it on the real system" in page.locator(".caution").inner_text()
    page.locator("#gb-name").fill("Ana")
    page.locator("#gb-secret").fill("wrong password")
    page.get_by_role("button", name="Sign in").click()
    page.locator(".error").wait_for(state="visible")
    tab.screenshot("14-sign-in-refused")
    tab.problems.clear()  # the refused sign-in answers 403, which the browser logs as a failed resource
    page.locator("#gb-secret").fill(PASSWORD)
    page.get_by_role("button", name="Sign in").click()
    tab.wait_until_loaded()
    # Signed in: the name given is the one teammates see.
    tab.open_tab("Share")
    assert page.locator(".gb-nickname input").input_value() == "Ana"
    # The earlier session's autosave is offered, not applied.
    offer = page.locator(".gb-message-offer")
    offer.wait_for(state="visible")
    assert "[[150, 40, 7]]" in offer.inner_text()
    assert tab.gain_text() != "[[150, 40, 7]]"
    tab.screenshot("15-restore-offer")
    before = tab.revision()
    page.get_by_role("button", name="Restore it").click()
    tab.wait_for_revision_above(before)
    tab.wait_for(lambda: tab.gain_text() == "[[150, 40, 7]]", "the restored K")
    plant = core.load_plant_file(PLANT_FILE)
    settled = tab.settled_snapshot()
    assert matched_distance(settled["poles"], numpy_closed_loop_poles(plant, [[150, 40, 7]])) < 1e-8  # numpy eig
    assert not offer.is_visible()
    assert "Traceback" not in guarded_server.log()
