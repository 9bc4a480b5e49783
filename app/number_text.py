"""Numbers as text, by one set of rules for the workbench, the report and the command line.

- ``None`` and NaN read "—"; infinities "∞" and "−∞" ("inf" and "-inf" in plain text);
- ``digits`` significant digits, and never "−0";
- a value within round-off of zero on the scale it is shown against (below 1e-9 of
  ``scale``) reads 0: a strip spanning hundreds never shows 2.7e-14;
- the screen and the report write a true minus sign (−); plain text (the command
  line, copyable K) writes ASCII;
- ``compact`` (cells of the gain matrix, at most five characters): thousands, millions and
  billions as k, M and G with ``digits`` significant digits, hundreds as whole numbers,
  tiny values as ``1e-4``.
"""

from __future__ import annotations

import math

__all__ = ["format_number", "format_complex", "format_gain_text"]


def format_number(value, digits: int = 4, *, scale: float = 0.0, plain: bool = False, compact: bool = False) -> str:
    """A real number as text (see the module's rules).

    Examples
    --------
    >>> format_number(-2.0), format_number(float('inf')), format_number(1234567.0)
    ('−2', '∞', '1.235e+06')
    >>> format_number(2.665e-14, scale=578.0), format_number(-191.04, scale=578.0)
    ('0', '−191')
    >>> format_number(-float('inf'), plain=True), format_number(-0.25, 6, plain=True)
    ('-inf', '-0.25')
    >>> [format_number(v, 2, compact=True) for v in (-65432.1, 2.5e6, 328.55, 0.4114, 1.2e-4)]
    ['−65k', '2.5M', '329', '0.41', '1.2e−4']
    """
    if value is None:
        return "—"
    value = float(value)
    if math.isnan(value):
        return "—"
    if math.isinf(value):
        if plain:
            return "inf" if value > 0 else "-inf"
        return "∞" if value > 0 else "−∞"
    if scale > 0 and abs(value) < 1e-9 * scale:
        return "0"
    suffix = ""
    text = None
    if compact:
        for size, letter in ((1e9, "G"), (1e6, "M"), (1e3, "k")):
            if abs(value) >= size * (1 - 0.5 * 10.0 ** (1 - digits)) and abs(value) < 1e12:
                value, suffix = value / size, letter
                break
        if not suffix and 100.0 <= abs(value) < 1000.0:
            text = f"{value:.0f}"
        elif 0.0 < abs(value) < 1e-3:
            text = f"{value:.{max(digits - 1, 0)}e}".replace("e-0", "e-").replace("e+0", "e")
    if text is None:
        text = f"{value:.{digits}g}" + suffix
    if text in ("-0", "0"):
        text = "0"
    return text if plain else text.replace("-", "−")


def format_complex(value: complex, digits: int = 4, *, plain: bool = False) -> str:
    """A pole as ``a ± bj``: ``−2 + 4j``, ``−2 − 4j`` or a real ``−10``.

    Examples
    --------
    >>> format_complex(complex(-2, 4)), format_complex(complex(-10, 0))
    ('−2 + 4j', '−10')
    >>> format_complex(complex(-2, -4), plain=True)
    '-2 - 4j'
    """
    value = complex(value)
    real = format_number(value.real, digits, plain=plain)
    if value.imag == 0:
        return real
    sign = "+" if value.imag > 0 else ("-" if plain else "−")
    return f"{real} {sign} {format_number(abs(value.imag), digits, plain=plain)}j"


def format_gain_text(gain) -> str:
    """K as JSON rows with 12 significant digits, as `gainboard evaluate --gain` accepts.

    Examples
    --------
    >>> format_gain_text([[199.0, 55.0, 8.0]])
    '[[199, 55, 8]]'
    """
    return "[" + ", ".join("[" + ", ".join(format_number(value, 12, plain=True) for value in row) + "]"
                           for row in gain) + "]"
