"""The bundled sample plants as the plant chooser lists them, and resolving a plant reference.

A reference is a plant file path or the stem of a bundled plant (``gainboard serve
cart_pendulum``); the chooser lists each bundled plant by its name and one-line
summary, read once from the files and again only when one of them changes.
"""

from __future__ import annotations

import functools
import logging
from dataclasses import dataclass
from pathlib import Path

from gainboard import core

__all__ = ["BundledPlant", "bundled_plants", "bundled_plant_catalogue", "plant_from_reference"]

log = logging.getLogger(__name__)


def bundled_plants() -> dict[str, Path]:
    """Bundled sample plant files by stem name (from :mod:`gainboard.sample_plants`)."""
    from gainboard.sample_plants import bundled_plant_files

    return dict(sorted(bundled_plant_files().items()))


@dataclass(frozen=True)
class BundledPlant:
    """A bundled sample plant as the plant chooser lists it.

    Attributes
    ----------
    stem : str
        Short name (the file name without ``.toml``), as ``gainboard serve`` accepts it.
    name : str
        The plant's name from its file.
    summary : str
        Its one-line summary.
    path : pathlib.Path
        The plant file.
    """

    stem: str
    name: str
    summary: str
    path: Path


@functools.lru_cache(maxsize=4)
def _catalogue(signature: tuple) -> tuple[BundledPlant, ...]:
    entries = []
    for stem, path, _ in signature:
        try:
            plant = core.load_plant_file(path)
        except core.GainboardError as error:  # a broken bundled file must not hide the others
            log.warning("bundled plant %s cannot be read: %s", stem, error)
            continue
        entries.append(BundledPlant(stem=stem, name=plant.name, summary=plant.summary, path=Path(path)))
    return tuple(entries)


def bundled_plant_catalogue() -> tuple[BundledPlant, ...]:
    """Every readable bundled plant with its name and one-line summary, sorted by stem.

    The files are read once and again only when one of them changes.
    """
    signature = []
    for stem, path in bundled_plants().items():
        try:
            stamp = path.stat().st_mtime_ns
        except OSError:
            continue
        signature.append((stem, str(path), stamp))
    return _catalogue(tuple(signature))


def plant_from_reference(reference: str | None) -> tuple[core.Plant, str, str]:
    """Resolve a plant file path or a bundled plant name.

    Parameters
    ----------
    reference : str or None
        A path to a TOML plant file, the stem of a bundled plant, or None for the
        first bundled plant.

    Returns
    -------
    (Plant, label, text)
        The checked plant, a short label for the screen and the TOML source text.

    Raises
    ------
    PlantError
        If the file is broken or no bundled plant has that name.
    """
    from gainboard.sample_plants import resolve_plant_reference

    path, label = resolve_plant_reference(reference)
    plant = core.load_plant_file(path)
    return plant, label, path.read_text(encoding="utf-8")
