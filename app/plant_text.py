"""Writing a plant back as plant-file text (TOML), for the plant editor.

A plant that arrives without its TOML source — from a design file, a snapshot link
or a live room — is shown in the editor as the text this module writes. The text
has the key structure of a plant file (see the README), every number written with
``repr`` (the shortest text that reads back to the same double), and is checked by
reading it back before it is used, so the editor never shows text that would load
a different plant.
"""

from __future__ import annotations

import math

from gainboard import core

from .design_file import plant_to_mapping

__all__ = ["plant_to_toml"]

#: Order of the tables in a written plant file (as in the bundled plant files).
_TABLES = ("model", "states", "inputs", "outputs", "disturbance", "noise", "specs")

#: TOML escapes for characters that may not appear raw in a basic string.
_ESCAPES = {"\b": "\\b", "\t": "\\t", "\n": "\\n", "\f": "\\f", "\r": "\\r", '"': '\\"', "\\": "\\\\"}


def _string(text: str, multi_line: bool = False) -> str:
    """A TOML basic string (multi-line for long descriptions)."""
    pieces = []
    for character in text:
        if multi_line and character == "\n":
            pieces.append("\n")
        elif character in _ESCAPES:
            pieces.append(_ESCAPES[character])
        elif ord(character) < 0x20 or ord(character) == 0x7F:
            pieces.append(f"\\u{ord(character):04X}")
        else:
            pieces.append(character)
    body = "".join(pieces)
    return f'"""\n{body}"""' if multi_line else f'"{body}"'


def _number(value) -> str:
    value = float(value)
    if math.isinf(value):
        return "inf" if value > 0 else "-inf"
    return repr(value)


def _value(value) -> str:
    if isinstance(value, str):
        return _string(value)
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return _number(value)
    if isinstance(value, list):
        if value and all(isinstance(item, list) for item in value):
            return "[\n" + "".join(f"  {_value(row)},\n" for row in value) + "]"
        return "[" + ", ".join(_value(item) for item in value) + "]"
    raise core.PlantError(f"cannot write {value!r} into a plant file")


def plant_to_toml(plant: core.Plant) -> str:
    """The plant-file (TOML) text of ``plant``; reading it back gives the same plant.

    Parameters
    ----------
    plant : gainboard.core.Plant

    Returns
    -------
    str
        TOML text with the tables ``[model]``, ``[states]``, ``[inputs]``,
        ``[outputs]``, ``[disturbance]``, ``[noise]`` when the plant has noise intensities and
        ``[specs]`` when it has suggested specs.

    Raises
    ------
    PlantError
        If the text would not read back to the same plant (reported, never shown wrong).

    Examples
    --------
    >>> plant = core.Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], name="double integrator")
    >>> text = plant_to_toml(plant)
    >>> core.parse_plant_text(text).A.tolist()
    [[0.0, 1.0], [0.0, 0.0]]
    """
    mapping = plant_to_mapping(plant)
    lines = []
    for key in ("name", "summary"):
        lines.append(f"{key} = {_string(mapping[key])}")
    description = mapping["description"]
    lines.append(f"description = {_string(description, multi_line=True) if chr(10) in description else _string(description)}")
    for table in _TABLES:
        if table not in mapping:
            continue
        lines.append("")
        lines.append(f"[{table}]")
        for key, value in mapping[table].items():
            if table == "inputs" and key in ("low", "high"):
                # plant_to_mapping writes unbounded limits as "inf" text for JSON; TOML has inf itself.
                value = [float(v) for v in value]
            lines.append(f"{key} = {_value(value)}")
    text = "\n".join(lines) + "\n"
    _check_reads_back(plant, mapping, text)
    return text


def _check_reads_back(plant: core.Plant, mapping: dict, text: str) -> None:
    try:
        again = plant_to_mapping(core.parse_plant_text(text, "written plant"))
    except core.PlantError as error:
        raise core.PlantError(f"the plant {plant.name!r} could not be written as plant-file text: {error}") from None
    if repr(again) != repr(mapping):  # repr compares every float bit for bit (−0.0 included)
        changed = sorted(key for key in mapping if repr(mapping[key]) != repr(again.get(key)))
        raise core.PlantError(
            f"the plant {plant.name!r} would not read back identically from plant-file text "
            f"(differences in {', '.join(changed) or 'its layout'}); please report this with the design"
        )
