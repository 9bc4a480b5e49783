"""Autosaves are per person and per server; only regular files are read, lazily; old ones are removed.

Outside references: ``O_NOFOLLOW`` makes ``open`` fail on a symlink and ``O_NONBLOCK`` makes opening a
FIFO for reading return at once without a writer (POSIX.1-2017, open(), from memory); ``S_ISREG`` tells a
regular file from a FIFO (POSIX <sys/stat.h>). The rest are rules of this project (no outside source).
"""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path

import pytest

from gainboard import core
from gainboard.app.autosave import AutosaveStore, autosave_owner, read_regular_file, remove_old_autosaves
from gainboard.app.design_file import Design, design_to_json

sys.path.insert(0, str(Path(__file__).resolve().parent / "browser"))

PLANT = core.Plant(A=[[-1.0]], B=[[1.0]])


def design(gain: float) -> Design:
    return Design(plant=PLANT, gain=[[gain]])


def test_people_and_servers_never_see_each_others_autosaves(tmp_path):
    ana, ben = autosave_owner("Ana"), autosave_owner("Ben")
    AutosaveStore.for_person("127-0-0-1_5006", ana, tmp_path).save(design(1.0))
    assert AutosaveStore.for_person("127-0-0-1_5006", ana, tmp_path).first_offerable().design.gain.tolist() == [[1.0]]
    assert AutosaveStore.for_person("127-0-0-1_5006", ben, tmp_path).first_offerable() is None
    assert AutosaveStore.for_person("127-0-0-1_5007", ana, tmp_path).first_offerable() is None
    # Without a login, each browser is its own person; a nameless sign-in ("guest") falls back to the browser.
    first, second = {"gainboard_browser": "a" * 24}, {"gainboard_browser": "b" * 24}
    assert autosave_owner(None, first) != autosave_owner(None, second)
    assert autosave_owner("guest", first) == autosave_owner(None, first)


def test_a_live_session_is_never_offered_and_restoring_moves_only_the_offered_file(tmp_path):
    owner = autosave_owner("Ana")
    live = AutosaveStore.for_person("s_1", owner, tmp_path)
    live.save(design(1.0))
    time.sleep(0.01)
    dead = AutosaveStore.for_person("s_1", owner, tmp_path)
    dead.save(design(2.0))  # the newest, from a session that has ended
    time.sleep(0.01)
    newcomer = AutosaveStore.for_person("s_1", owner, tmp_path)
    assert newcomer.first_offerable({live.session_id, dead.session_id}) is None
    entry = newcomer.first_offerable({live.session_id})
    assert entry.session_id == dead.session_id
    assert newcomer.claim(entry)
    assert not dead.path.exists() and newcomer.path.exists() and live.path.exists()  # the live one untouched


def test_a_fifo_and_a_symlink_in_the_folder_are_skipped_without_blocking(tmp_path):
    store = AutosaveStore.for_person("s_1", autosave_owner("Ana"), tmp_path)
    store.save(design(3.0))
    time.sleep(0.01)
    folder = store.folder
    os.mkfifo(folder / "session-fifo.json")  # newest: would hang a plain open() forever
    secret = tmp_path / "elsewhere.json"
    secret.write_text(design_to_json(design(9.0)))
    (folder / "session-link.json").symlink_to(secret)
    os.utime(folder / "session-link.json", follow_symlinks=False)
    assert read_regular_file(folder / "session-fifo.json", 10_000) is None
    assert read_regular_file(folder / "session-link.json", 10_000) is None
    assert read_regular_file(store.path, 10_000) is not None
    entry = AutosaveStore(folder).first_offerable()
    assert entry.session_id == store.session_id and entry.design.gain.tolist() == [[3.0]]


def test_offering_stops_at_the_first_usable_file_and_skips_oversize_ones(tmp_path, monkeypatch):
    from gainboard.app import autosave as autosave_module

    store = AutosaveStore(tmp_path)
    for index in range(5):
        AutosaveStore(tmp_path).save(design(float(index)))
        time.sleep(0.01)
    read = []
    original = autosave_module.read_regular_file
    monkeypatch.setattr(autosave_module, "read_regular_file", lambda path, limit: read.append(path) or original(path, limit))
    assert store.first_offerable().design.gain.tolist() == [[4.0]]
    assert len(read) == 1  # the newest only
    monkeypatch.setattr(autosave_module, "MAX_AUTOSAVE_BYTES", 10)
    assert store.first_offerable() is None  # every file is above the (lowered) limit


def test_autosaves_older_than_thirty_days_are_removed(tmp_path):
    old = AutosaveStore.for_person("s_1", autosave_owner("Ana"), tmp_path)
    old.save(design(1.0))
    fresh = AutosaveStore.for_person("s_2", autosave_owner("Ben"), tmp_path)
    fresh.save(design(2.0))
    month = time.time() - 31 * 86400
    os.utime(old.path, (month, month))
    assert remove_old_autosaves(tmp_path) == 1
    assert not old.path.exists() and fresh.path.exists()


def test_two_servers_on_one_data_folder_never_see_each_others_autosaves(tmp_path):
    from session_client import SessionClient
    from workbench_server import RunningServer

    plant = str(Path(__file__).resolve().parent / "data" / "third_order_reference.toml")
    environment = {"GAINBOARD_DATA_DIR": str(tmp_path)}
    first = RunningServer(plant, environment=environment)
    second = RunningServer(plant, environment=environment)
    try:
        writer = SessionClient(first.url, {"name": "Ana"})
        writer.set_entry(0, 0, 201.0)
        writer.wait_for(lambda: list(tmp_path.glob("autosave/*/*/session-*.json")), "the first server's autosave")
        reader = SessionClient(second.url, {"name": "Ana"})  # the same person (no login): another server
        # The offer is an HTML pane's text ("An autosaved design from ... Restore it here?").
        offered = [m for m in reader.document.models if "autosaved design from" in str(getattr(m, "text", ""))]
        assert not offered
        servers = {path.parts[-3] for path in tmp_path.glob("autosave/*/*/session-*.json")}
        assert len(servers) == 1  # only the first server's folder holds a design
        writer.close()
        reader.close()
    finally:
        first.stop()
        second.stop()
