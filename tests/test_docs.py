"""The reference documentation builds with warnings as errors, and its walkthrough runs as written."""

from __future__ import annotations

import json
import re
import shlex
import subprocess
import sys
from pathlib import Path

DOCS = Path(__file__).resolve().parent.parent / "docs"


def test_the_reference_builds_from_the_docstrings_without_warnings(tmp_path):
    completed = subprocess.run([sys.executable, "-m", "sphinx", "-W", "--keep-going", "-q", "-b", "html",
                                str(DOCS), str(tmp_path / "html")], capture_output=True, text=True, timeout=600)
    assert completed.returncode == 0, completed.stderr[-4000:]
    api = (tmp_path / "html" / "api.html").read_text(encoding="utf-8")
    for name in ("plant_from_arrays", "assign_poles", "entry_stable_intervals", "export_design", "workbench"):
        assert f'id="gainboard.{name}"' in api, name  # documented from its docstring
    assert "0-based" in api


def _blocks(language: str) -> list[str]:
    text = (DOCS / "script_to_firmware.rst").read_text(encoding="utf-8")
    blocks = re.findall(rf"\.\. code-block:: {language}\n\n((?:   .*\n|\n)+)", text)
    return ["\n".join(line[3:] for line in block.splitlines()) for block in blocks]


def test_the_script_to_firmware_walkthrough_runs_as_written(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    namespace: dict = {}
    exec(compile("\n".join(_blocks("python")), "script_to_firmware.rst", "exec"), namespace)  # noqa: S102
    # The second-order stage: poles −8 ± 6j give ζ = 0.8, so about 1.5 % overshoot (handbook formula
    # exp(−πζ/√(1−ζ²))) and a 2 % settling time near 4/(ζωn) = 0.5 s: both specs are met.
    assert namespace["evaluation"].spec_report.all_passed
    assert "stage_K" in namespace["header"]
    gainboard_script = Path(sys.executable).with_name("gainboard")
    for block in _blocks("bash"):
        for line in block.splitlines():
            if line.startswith("gainboard "):
                command, _, redirect = line.partition(" > ")
                argv = [str(gainboard_script), *shlex.split(command)[1:]]
                completed = subprocess.run(argv, capture_output=True, text=True, timeout=120)
                assert completed.returncode == 0, (line, completed.stderr)
                if redirect:
                    Path(redirect.strip()).write_text(completed.stdout)
    assert json.loads(Path("report.json").read_text())["specs"]["all_passed"] is True
