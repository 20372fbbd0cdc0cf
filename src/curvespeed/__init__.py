"""curvespeed: target speed profiles along a known route.

The data's path: route file -> :class:`~curvespeed.route.Route` (``curvespeed.io``) ->
resampled :class:`~curvespeed.geometry.Geometry` -> :class:`~curvespeed.limits.Limits` and route
constraints -> solver -> :class:`~curvespeed.profile.Profile` -> verifier -> writers.
"""

__version__ = "0.1.0"
