"""The design elements of an exact alignment as arrays, for the model and the judge."""

from __future__ import annotations

import numpy as np

from curvespeed.geometry.elements import Alignment


def element_table(alignment: Alignment) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Start station of every element and the end of the last (metres), each element's
    curvature at its start (1/m) and its constant curvature rate (1/m^2)."""
    elements = alignment.elements
    starts = np.concatenate(([0.0], np.cumsum([e.length_m for e in elements])))
    k0 = np.array([e.start_1pm for e in elements])
    rate = np.array([(e.end_1pm - e.start_1pm) / e.length_m for e in elements])
    return starts, k0, rate


def curvature_in(alignment: Alignment, station_m, element) -> tuple[np.ndarray, np.ndarray]:
    """Curvature (1/m) and curvature rate (1/m^2) at ``station_m`` of element(s) ``element``."""
    starts, k0, rate = element_table(alignment)
    return k0[element] + rate[element] * (station_m - starts[element]), rate[element]


def curvature_steps(alignment: Alignment) -> np.ndarray:
    """Jump of the curvature at every joint between elements, 1/m (0 where it is continuous)."""
    k = np.array([[e.start_1pm, e.end_1pm] for e in alignment.elements])
    return k[1:, 0] - k[:-1, 1]
