"""The command line never prints a control character from a file: names, units and notes are escaped.

ESC (U+001B) starts terminal control sequences (ECMA-48 §5.3, from memory); U+202E RIGHT-TO-LEFT
OVERRIDE reorders the text shown (Unicode UAX #9; Boucher & Anderson, "Trojan Source", 2021);
U+0085 is a C1 control (ECMA-48 §5.4). Unicode categories Cc and Cf come from Python's unicodedata.
"""

from __future__ import annotations

import json

from gainboard.app.cli import main
from gainboard.app.cli_output import printable

HOSTILE_PLANT = """
name = "cart\\u001b[2J\\u001b[31m pole\\u202e"
[model]
A = [[0.0, 1.0], [0.0, 0.0]]
B = [[0.0], [1.0]]
[states]
names = ["position\\u0085", "speed"]
units = ["m\\u001b]0;title\\u0007", "m/s"]
[inputs]
names = ["force"]
"""


def test_a_plant_name_with_esc_is_printed_escaped_in_the_table(tmp_path, capsys):
    path = tmp_path / "hostile.toml"
    path.write_text(HOSTILE_PLANT, encoding="utf-8")
    code = main(["evaluate", str(path), "--gain", "[[1, 2]]"])
    out, err = capsys.readouterr()
    assert code == 0, err
    for raw in ("\x1b", "\u202e", "\x85", "\x07"):
        assert raw not in out and raw not in err
    assert "cart\\x1b[2J" in out
    # JSON escapes them itself (json.dumps' ensure_ascii default) and keeps the name exact.
    assert main(["evaluate", str(path), "--gain", "[[1, 2]]", "--json"]) == 0
    out, _ = capsys.readouterr()
    assert "\x1b" not in out and json.loads(out)["plant"] == "cart\x1b[2J\x1b[31m pole\u202e"


def test_an_error_message_carrying_a_name_from_a_file_is_escaped_too(tmp_path, capsys, monkeypatch):
    from gainboard import core
    from gainboard.app import cli

    def refuse(reference):  # a refusal that quotes a name read from a file, as many of ours do
        raise core.PlantError("plant 'cart\x1b[2J pole' has no input named 'force\u202e'")

    monkeypatch.setattr(cli, "resolve_plant", refuse)
    assert main(["evaluate", "anything.toml", "--gain", "[[1, 2]]"]) == 2
    _, err = capsys.readouterr()
    assert "\x1b" not in err and "\u202e" not in err and "cart\\x1b[2J" in err


def test_printable_keeps_newlines_tabs_and_ordinary_text():
    assert printable("K = [[1, 2]]\n\tµ, ², é, 中") == "K = [[1, 2]]\n\tµ, ², é, 中"
    assert printable("\u200b\x00\x7f") == "\\u200b\\x00\\x7f"
