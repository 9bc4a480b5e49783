"""Autosave: where it writes, that it restores the newest design, and that a crash cannot damage it.

Outside references used here:
- XDG Base Directory Specification (freedesktop.org; from memory): user data goes to $XDG_DATA_HOME,
  default ~/.local/share, and a relative $XDG_DATA_HOME is invalid and must be ignored.
- POSIX rename(2) / Python's os.replace (from memory): replacing a file is atomic, so a reader sees the
  old or the new file, never a mixture; a crash before the replace leaves the old file untouched.
"""

import os
import stat
import time

import pytest

from gainboard import core
from gainboard.app import autosave as autosave_module
from gainboard.app import design_file
from gainboard.app.autosave import AutosaveStore, default_autosave_folder
from gainboard.app.design_file import Design, DesignFileError

# Invented demo plant (a lightly damped mass on a spring); used only as data to store.
PLANT = core.Plant(
    A=[[0.0, 1.0], [-4.0, -0.4]], B=[[0.0], [1.0]], name="spring-mass demo",
    state_names=("position", "velocity"), state_units=("m", "m/s"),
)


def design_with(k1: float) -> Design:
    return Design(plant=PLANT, gain=[[k1, 1.0]])


@pytest.fixture
def data_dir(tmp_path, monkeypatch):
    monkeypatch.setenv("GAINBOARD_DATA_DIR", str(tmp_path / "data"))
    return tmp_path / "data"


def test_folder_follows_the_override_then_xdg_then_the_home_default(tmp_path, monkeypatch):
    monkeypatch.setenv("GAINBOARD_DATA_DIR", str(tmp_path / "override"))
    assert default_autosave_folder() == tmp_path / "override" / "autosave"
    monkeypatch.delenv("GAINBOARD_DATA_DIR")
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "xdg"))
    assert default_autosave_folder() == tmp_path / "xdg" / "gainboard" / "autosave"  # XDG spec (from memory)
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    monkeypatch.setenv("XDG_DATA_HOME", "relative/path")  # invalid per the XDG spec: ignored
    assert default_autosave_folder() == tmp_path / "home" / ".local" / "share" / "gainboard" / "autosave"
    monkeypatch.delenv("XDG_DATA_HOME")
    assert default_autosave_folder() == tmp_path / "home" / ".local" / "share" / "gainboard" / "autosave"


def test_the_next_start_is_offered_the_newest_design_of_an_earlier_session(data_dir):
    first, second = AutosaveStore(session_id="first"), AutosaveStore(session_id="second")
    first.save(design_with(1.0))
    second.save(design_with(2.0))
    later = time.time() + 5
    os.utime(first.path, (later, later))  # the first session edited last
    first_path = first.save(design_with(3.0))
    os.utime(first_path, (later, later))
    restart = AutosaveStore()
    offer = restart.latest()
    assert offer.session_id == "first" and offer.design.gain.tolist() == [[3.0, 1.0]]
    assert [entry.session_id for entry in restart.entries()] == ["first", "second"]
    assert second.latest().session_id == "first"  # a session is offered others' work, not its own
    assert first.latest().session_id == "second" and first.latest(include_own=True).session_id == "first"
    assert offer.path.parent == data_dir / "autosave"


def test_the_folder_is_private_to_the_user(data_dir):
    AutosaveStore(session_id="s").save(design_with(1.0))
    folder_mode = stat.S_IMODE((data_dir / "autosave").stat().st_mode)
    file_mode = stat.S_IMODE((data_dir / "autosave" / "session-s.json").stat().st_mode)
    assert folder_mode & 0o077 == 0 and file_mode & 0o077 == 0  # no access for group or others


def test_a_crash_during_the_write_keeps_the_previous_autosave(data_dir, monkeypatch):
    store = AutosaveStore(session_id="crashy")
    store.save(design_with(1.0))

    def crash(*args):
        raise KeyboardInterrupt("power cut between writing the temporary file and replacing")

    with monkeypatch.context() as patch, pytest.raises(KeyboardInterrupt):
        patch.setattr(design_file.os, "replace", crash)
        store.save(design_with(2.0))
    assert AutosaveStore().latest().design.gain.tolist() == [[1.0, 1.0]]  # rename is all-or-nothing (POSIX)
    assert not list((data_dir / "autosave").glob("*.tmp"))  # the interrupted write cleaned up after itself


def test_a_temporary_file_left_by_a_killed_process_is_ignored(data_dir):
    store = AutosaveStore(session_id="killed")
    store.save(design_with(1.0))
    half = design_file.design_to_json(design_with(9.0))[:150]
    leftover = data_dir / "autosave" / ".session-killed.json.x1y2z3.tmp"
    leftover.write_text(half)  # what SIGKILL mid-write would leave
    offer = AutosaveStore().latest()
    assert offer.session_id == "killed" and offer.design.gain.tolist() == [[1.0, 1.0]]


def test_damaged_autosaves_are_skipped_for_the_next_readable_one(data_dir):
    AutosaveStore(session_id="good").save(design_with(4.0))
    damaged = data_dir / "autosave" / "session-damaged.json"
    damaged.write_text('{"format": "gainboard-design", "version": 1, "plant": ')
    newer = time.time() + 10
    os.utime(damaged, (newer, newer))
    from_future = data_dir / "autosave" / "session-future.json"
    from_future.write_text('{"format": "gainboard-design", "version": 99}')
    os.utime(from_future, (newer, newer))
    offer = AutosaveStore().latest()
    assert offer.session_id == "good" and offer.design.gain.tolist() == [[4.0, 1.0]]
    assert damaged.exists() and from_future.exists()  # never deleted behind the user's back


def test_discard_removes_only_the_named_session(data_dir):
    mine, other = AutosaveStore(session_id="mine"), AutosaveStore(session_id="other")
    mine.save(design_with(1.0))
    other.save(design_with(2.0))
    assert mine.discard() is True and not mine.path.exists() and other.path.exists()
    assert mine.discard() is False
    assert mine.discard("other") is True and AutosaveStore().latest() is None


def test_saving_an_unchanged_design_writes_nothing(data_dir, monkeypatch):
    writes = []
    original = autosave_module.write_text_atomically
    monkeypatch.setattr(autosave_module, "write_text_atomically",
                        lambda path, text, **options: writes.append(path) or original(path, text, **options))
    store = AutosaveStore(session_id="quiet")
    design = design_with(1.0)
    store.save(design)
    store.save(design)
    store.save(design_with(2.0))
    assert len(writes) == 2


def test_prune_keeps_the_newest_and_removes_only_stale_temporary_files(data_dir):
    folder = data_dir / "autosave"
    now = time.time()
    for index in range(5):
        path = AutosaveStore(session_id=f"s{index}").save(design_with(float(index)))
        os.utime(path, (now - 100 + index, now - 100 + index))
    stale, fresh = folder / ".session-s9.json.old.tmp", folder / ".session-s8.json.new.tmp"
    stale.write_text("{")
    fresh.write_text("{")
    os.utime(stale, (now - 7200, now - 7200))
    assert AutosaveStore(session_id="s4").prune(keep=2, now=now) == 3  # s0 and s1 (s4 is its own), and the stale file
    assert sorted(p.name for p in folder.glob("session-*.json")) == ["session-s2.json", "session-s3.json", "session-s4.json"]
    assert fresh.exists() and not stale.exists()  # a write in progress elsewhere is left alone


@pytest.mark.parametrize("bad", ["../escape", "a/b", "", "x" * 65, "space id"])
def test_session_ids_cannot_leave_the_folder(data_dir, bad):
    with pytest.raises(DesignFileError, match=r"a session id must be 1 to 64 letters, digits"):
        AutosaveStore(session_id=bad)
    with pytest.raises(DesignFileError, match=r"a session id must be"):
        AutosaveStore(session_id="ok").discard(bad)


def test_an_unwritable_folder_is_reported_with_what_to_do(tmp_path):
    blocker = tmp_path / "not-a-folder"
    blocker.write_text("a file where the folder should be")
    with pytest.raises(DesignFileError, match=r"cannot autosave to .*set GAINBOARD_DATA_DIR to a writable folder"):
        AutosaveStore(folder=blocker / "autosave", session_id="s").save(design_with(1.0))
