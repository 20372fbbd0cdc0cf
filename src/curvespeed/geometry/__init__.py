"""Route geometry: from points (or design elements) to stations with heading and curvature.

* :mod:`.model` -- the :class:`Geometry` every later step uses, and helpers on it;
* :mod:`.points` -- :func:`build_geometry`, the fit of a route's points;
* :mod:`.noise` -- the noise of points, estimated from the points alone;
* :mod:`.pspline` -- the penalised spline fit; :mod:`.arclength` -- arc length of the fit.
"""

from .model import Geometry, geometry_from_curvature, summarise_geometry
from .noise import estimate_scatter
from .points import build_geometry
from .pspline import residual_target

__all__ = ["Geometry", "build_geometry", "estimate_scatter", "geometry_from_curvature",
           "residual_target", "summarise_geometry"]
