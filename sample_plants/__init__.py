"""Sample plants bundled with gainboard.

Each ``*.toml`` file in this package is a plant file (format in the README) for an
invented scenario derived from its physics: the file's ``description`` states the
equations, assumptions, operating point and parameter values behind the linear
model. The plants are for learning and demonstration; a design made on any of them
still has to be validated on the real system.

Examples
--------
>>> files = bundled_plant_files()
>>> "maglev_ball" in files and files["maglev_ball"].suffix == ".toml"
True
>>> plant = load_bundled_plant("maglev_ball")
>>> plant.state_count, plant.input_count
(3, 1)
"""

from __future__ import annotations

from pathlib import Path

from gainboard.core import Plant, PlantError, load_plant_file

__all__ = ["bundled_plant_files", "load_bundled_plant", "resolve_plant_reference"]

#: The directory of this package, where the plant files are installed beside this module.
_PLANT_DIRECTORY = Path(__file__).resolve().parent


def bundled_plant_files() -> dict[str, Path]:
    """Map the short name (file stem) of every bundled plant file to its path.

    Returns
    -------
    dict of str to pathlib.Path
        Sorted by stem, e.g. ``{"cart_pendulum": Path(".../cart_pendulum.toml"), ...}``.
        A new dict on every call, so callers may change it freely.
    """
    return {path.stem: path for path in sorted(_PLANT_DIRECTORY.glob("*.toml"))}


def load_bundled_plant(stem: str) -> Plant:
    """Read and validate one bundled plant file.

    Parameters
    ----------
    stem : str
        Short name of the plant, the file name without ``.toml``
        (see :func:`bundled_plant_files`).

    Returns
    -------
    Plant
        The validated plant, with its suggested specs in ``plant.specs``.

    Raises
    ------
    PlantError
        If no bundled plant has that name; the message lists the names there are.
    """
    files = bundled_plant_files()
    if not isinstance(stem, str) or stem not in files:
        known = ", ".join(files) or "(none installed)"
        raise PlantError(f"there is no bundled plant called {stem!r}; the bundled plants are: {known}")
    return load_plant_file(files[stem])


def resolve_plant_reference(reference: str | None) -> tuple[Path, str]:
    """Find the plant file meant by a path or a bundled plant's name.

    Parameters
    ----------
    reference : str or None
        A path to a TOML plant file (anything that exists, ends in ``.toml`` or
        contains ``/``), the stem of a bundled plant, or None for the first bundled plant.

    Returns
    -------
    (pathlib.Path, str)
        The file and a short label: the stem for a bundled plant, else the file name.

    Raises
    ------
    PlantError
        If the name is neither a file nor a bundled plant; the message lists the bundled ones.
    """
    bundled = bundled_plant_files()
    if reference is None:
        if not bundled:
            raise PlantError("no bundled plants are installed; give a plant file to open")
        reference = next(iter(bundled))
    path = Path(reference)
    if path.exists() or path.suffix == ".toml" or "/" in reference:
        return path, path.name
    if reference not in bundled:
        raise PlantError(
            f"no plant file {reference!r} and no bundled plant of that name; "
            f"bundled plants: {', '.join(bundled) or 'none'}"
        )
    return bundled[reference], reference
