"""The built wheel and sdist hold every module of the source tree, under the gainboard namespace.

A hand-written package list once left ``gainboard.app.views`` out of the wheel, so ``gainboard serve``
crashed after a normal (non-editable) install while the editable checkout worked. These tests build
the distributions the way a user's pip does (``python -m build``: sdist first, then the wheel from the
sdist) and compare their contents with a walk of the source folders.
"""

from __future__ import annotations

import email.parser
import subprocess
import sys
import tarfile
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent

#: Source folder -> installed package (the design card: nothing installed as a bare `core` or `app`).
INSTALLED_AS = {"api": "gainboard", "core": "gainboard/core", "app": "gainboard/app",
                "sample_plants": "gainboard/sample_plants"}
#: Files of the source tree that a user's install needs: code, bundled plants, the typing marker.
SHIPPED_SUFFIXES = (".py", ".toml", ".typed")


def source_files() -> dict[str, Path]:
    """Installed path (inside the wheel) -> source file, for every shipped file under the source folders."""
    files = {}
    for folder, package in INSTALLED_AS.items():
        for path in sorted((ROOT / folder).rglob("*")):
            if path.is_file() and path.suffix in SHIPPED_SUFFIXES and "__pycache__" not in path.parts:
                files[f"{package}/{path.relative_to(ROOT / folder).as_posix()}"] = path
    return files


@pytest.fixture(scope="module")
def distributions(tmp_path_factory):
    out = tmp_path_factory.mktemp("dist")
    completed = subprocess.run([sys.executable, "-m", "build", "--outdir", str(out), str(ROOT)],
                               capture_output=True, text=True, timeout=600)
    assert completed.returncode == 0, completed.stdout[-3000:] + completed.stderr[-3000:]
    (wheel,) = out.glob("gainboard-*.whl")
    (sdist,) = out.glob("gainboard-*.tar.gz")
    return wheel, sdist


def test_the_source_walk_finds_the_subpackages_that_were_once_missed():
    # The walk itself must see nested packages, or the comparison below proves nothing.
    files = source_files()
    assert "gainboard/app/views/__init__.py" in files
    assert "gainboard/sample_plants/cart_pendulum.toml" in files
    assert "gainboard/__init__.py" in files and "gainboard/py.typed" in files


def test_the_wheel_holds_every_source_module_and_nothing_at_top_level(distributions):
    wheel, _ = distributions
    names = set(zipfile.ZipFile(wheel).namelist())
    missing = sorted(set(source_files()) - names)
    assert not missing, f"the wheel lacks {missing}"
    top_level = {name.split("/")[0] for name in names}
    assert top_level == {"gainboard", f"{wheel.name.split('-')[0]}-{wheel.name.split('-')[1]}.dist-info"}, top_level


def test_the_wheel_metadata_states_the_licence_and_refuses_upload(distributions):
    wheel, _ = distributions
    archive = zipfile.ZipFile(wheel)
    (metadata_name,) = [n for n in archive.namelist() if n.endswith(".dist-info/METADATA")]
    metadata = email.parser.Parser().parsestr(archive.read(metadata_name).decode())
    # PEP 639: the SPDX expression in License-Expression, the file under .dist-info/licenses/.
    assert metadata["License-Expression"] == "LicenseRef-Proprietary"
    assert "Private :: Do Not Upload" in metadata.get_all("Classifier")
    assert any(n.endswith(".dist-info/licenses/LICENSE") for n in archive.namelist())
    requirements = metadata.get_all("Requires-Dist")
    base = [r for r in requirements if "extra ==" not in r]
    # The base install is the numeric core and the command line: no browser stack.
    assert not any(r.startswith(("panel", "bokeh", "param")) for r in base), base
    (entry_points,) = [n for n in archive.namelist() if n.endswith(".dist-info/entry_points.txt")]
    assert "gainboard = gainboard.app.cli:main" in archive.read(entry_points).decode()


def test_the_sdist_carries_what_a_rebuild_needs(distributions):
    _, sdist = distributions
    with tarfile.open(sdist) as archive:
        names = {name.split("/", 1)[1] for name in archive.getnames() if "/" in name}
    for needed in ("setup.py", "pyproject.toml", "LICENSE", "README.md", "app/views/__init__.py",
                   "sample_plants/cart_pendulum.toml", "api/py.typed"):
        assert needed in names, f"the sdist lacks {needed}"
