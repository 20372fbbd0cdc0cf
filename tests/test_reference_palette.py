"""The report's and figure's colours stay apart for colour-blind readers.

Reference library: colorspacious (Smith and van der Walt), whose ``sRGB1+CVD`` space simulates
protan, deutan and tritan colour vision by the model of Machado, Oliveira and Fernandes (2009),
and whose CAM02-UCS space (Luo, Cui and Li 2006) measures colour difference, where a distance of
about 1 is one just-noticeable difference. Every pair of marks the drawings tell apart by colour
alone must stay at least :data:`MIN_DISTANCE` apart under each full (severity 100) deficiency.
"""

from __future__ import annotations

import colorspacious  # the test extra installs it; a missing one fails, never skips
import numpy as np
import pytest

from curvespeed.report.palette import ROLES

#: Ten just-noticeable differences in CAM02-UCS: chosen for marks read at a glance in a printed
#: report, not side by side. The control pair below (the red and green of matplotlib's default
#: cycle under deuteranopia, a pair known to be confused) measures 5.2 and fails it.
MIN_DISTANCE = 10.0

DEFICIENCIES = ("protanomaly", "deuteranomaly", "tritanomaly")

#: Marks told apart by colour alone (the others also differ in dashes or hatching).
COLOUR_ONLY = {
    "failing curve / curve failing within the uncertainty": ("curve_fail", "curve_on_bound"),
    "passing curve / failing curve": ("curve", "curve_fail"),
    "passing curve / curve failing within the uncertainty": ("curve", "curve_on_bound"),
    "speed / ceiling": ("speed", "ceiling"),
    "grip use / comfort use": ("grip", "comfort"),
    "braking / launch": ("braking", "launch"),
    "passing disc / failing disc": ("speed", "curve_fail"),
}


def distance(a: str, b: str, deficiency: str) -> float:
    space = {"name": "sRGB1+CVD", "cvd_type": deficiency, "severity": 100}

    def ucs(hex_colour):
        rgb = np.array([int(hex_colour[i:i + 2], 16) for i in (1, 3, 5)]) / 255.0
        return colorspacious.cspace_convert(rgb, space, "CAM02-UCS")

    return float(np.linalg.norm(ucs(a) - ucs(b)))


@pytest.mark.parametrize("deficiency", DEFICIENCIES)
@pytest.mark.parametrize("pair", list(COLOUR_ONLY))
def test_marks_told_apart_by_colour_stay_apart(pair, deficiency):
    a, b = COLOUR_ONLY[pair]
    assert distance(ROLES[a], ROLES[b], deficiency) >= MIN_DISTANCE


def test_the_measure_catches_a_pair_known_to_be_confused():
    # matplotlib's default red and green (#d62728, #2ca02c) under deuteranopia
    assert distance("#d62728", "#2ca02c", "deuteranomaly") < MIN_DISTANCE
    # the same pair as a protan sees it stays apart: the measure tells deficiencies apart
    assert distance("#d62728", "#2ca02c", "protanomaly") > MIN_DISTANCE
