"""Where the installed packages come from (all other metadata is in pyproject.toml).

The repository keeps core/, app/ and sample_plants/ at top level (design card) and the
top-level ``gainboard`` package in api/; installed, everything lives under the
``gainboard`` namespace, so no bare ``core`` or ``app`` is ever installed.

Subpackages are *discovered* (``find_packages`` inside each source folder), never listed
by hand: a hand-written list once left ``gainboard.app.views`` out of the wheel and
``gainboard serve`` crashed after a normal install. tests/test_packaging.py builds the
wheel and compares it with the source tree.
"""

from setuptools import find_packages, setup

#: Installed package name -> source folder in the repository.
SOURCE_FOLDERS = {
    "gainboard": "api",
    "gainboard.core": "core",
    "gainboard.app": "app",
    "gainboard.sample_plants": "sample_plants",
}


def installed_packages() -> list[str]:
    """Every package under each source folder, named as installed."""
    packages = []
    for name, folder in SOURCE_FOLDERS.items():
        packages.append(name)
        packages.extend(f"{name}.{subpackage}" for subpackage in find_packages(folder))
    return packages


setup(packages=installed_packages(), package_dir=SOURCE_FOLDERS)
