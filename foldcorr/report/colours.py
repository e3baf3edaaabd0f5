"""The colour scale of MCC and R_K values, the one place every report takes it from.

A continuous scale of our own from plum (-1) through a neutral grey (0) to ink
blue (+1), interpolated linearly in RGB between the three anchors of
:data:`MCC_ANCHORS`: no bands and no cut-offs, so 0.697 and 0.702 look alike.
Colour only repeats what the printed number says (every report prints the
number), and the terminal shows it only where colour is on (never with
``NO_COLOR`` or when piped). The HTML report draws the scale as a legend.
"""

from __future__ import annotations

import math

__all__ = ["MCC_ANCHORS", "mcc_colour", "scale_stops"]

#: (value, colour) anchors of the scale, lowest first; colours between are interpolated.
MCC_ANCHORS = ((-1.0, (0x8e, 0x3b, 0x8a)), (0.0, (0x8a, 0x8f, 0x98)), (1.0, (0x13, 0x5f, 0xa8)))


def mcc_colour(value) -> str:
    """The colour of a correlation value as ``#rrggbb`` ("" for an undefined value).

    Values outside [-1, 1] take the colour of the nearest end.

    Examples
    --------
    >>> mcc_colour(-1), mcc_colour(0), mcc_colour(1), mcc_colour(float("nan"))
    ('#8e3b8a', '#8a8f98', '#135fa8', '')
    >>> mcc_colour(0.5)
    '#4e77a0'
    """
    if value is None:
        return ""
    value = float(value)
    if math.isnan(value):
        return ""
    value = min(max(value, MCC_ANCHORS[0][0]), MCC_ANCHORS[-1][0])
    for (lo, c_lo), (hi, c_hi) in zip(MCC_ANCHORS, MCC_ANCHORS[1:]):
        if value <= hi:
            t = (value - lo) / (hi - lo)
            rgb = (round(a + (b - a) * t) for a, b in zip(c_lo, c_hi))
            return "#" + "".join(f"{c:02x}" for c in rgb)
    return ""  # not reached: the value was clipped to the anchors


def scale_stops(count: int = 9) -> list[tuple[float, str]]:
    """Evenly spaced ``(value, colour)`` stops of the scale from -1 to 1, for a legend.

    Examples
    --------
    >>> scale_stops(3)
    [(-1.0, '#8e3b8a'), (0.0, '#8a8f98'), (1.0, '#135fa8')]
    """
    return [(-1.0 + 2.0 * i / (count - 1), mcc_colour(-1.0 + 2.0 * i / (count - 1)))
            for i in range(count)]
