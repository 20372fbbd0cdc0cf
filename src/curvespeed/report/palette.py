"""The colours of reports and the overview figure, chosen for colour-blind readers.

The hues are the Okabe-Ito palette (Okabe and Ito, "Color Universal Design", 2008), designed to
stay apart for the common red-green colour deficiencies; every pairing used here also differs in
lightness or in line style (dashes, hatching), so a reader who sees no colour at all still tells
them apart. One table for the HTML report (:mod:`curvespeed.report.svg`) and the matplotlib
figures (:mod:`curvespeed.plots`), so both speak the same visual language.
"""

from __future__ import annotations

#: Okabe-Ito hues by their usual names.
BLACK = "#000000"
ORANGE = "#E69F00"
SKY_BLUE = "#56B4E9"
BLUISH_GREEN = "#009E73"
YELLOW = "#F0E442"
BLUE = "#0072B2"
VERMILLION = "#D55E00"
REDDISH_PURPLE = "#CC79A7"
GREY = "#6E6E6E"
LIGHT_GREY = "#D9D9D9"

#: What each element of the drawings is, and its colour.
ROLES = {
    "speed": BLUE,               # the speed line (and the route in plan)
    "ceiling": GREY,             # the speed ceiling, dashed
    "curve": SKY_BLUE,           # curve bands behind the speed; curves in plan
    "curve_fail": VERMILLION,    # a failing curve (plus a dashed outline)
    "curve_on_bound": ORANGE,    # fails only within the curvature's uncertainty
    "braking": VERMILLION,       # braking zones, hatched
    "launch": BLUISH_GREEN,      # launch zones (speeding up)
    "grip": BLUE,                # grip use, solid
    "comfort": ORANGE,           # comfort use, dashed
    "limit": BLACK,              # the 100 % line
    "start": BLACK,
}

#: Fill opacity of zones and bands drawn behind lines.
ZONE_ALPHA = 0.18
BAND_ALPHA = 0.28


def curve_colour(verdict: str) -> str:
    """Colour of a curve by its check verdict (``pass``, ``fail``, ``fails_on_bound``)."""
    return {"fail": ROLES["curve_fail"], "fails_on_bound": ROLES["curve_on_bound"]}.get(
        verdict, ROLES["speed"])
