"""curvespeed: target speed profiles along a known route.

The data's path: route file -> :class:`~curvespeed.route.Route` (``curvespeed.io``) ->
resampled :class:`~curvespeed.geometry.Geometry` -> :class:`~curvespeed.limits.Limits` and route
constraints -> solver -> :class:`~curvespeed.profile.Profile` -> verifier -> writers.

The library face for scripts (``import curvespeed as cs``), each name the library's own
function or class, imported on first use so that ``import curvespeed`` (and the command line)
stays fast:

* :func:`cs.read_route <curvespeed.io.read_route>` -- a route file (CSV, GeoJSON, GPX);
* :func:`cs.read_opendrive <curvespeed.io.opendrive_path.read_opendrive>` -- a path along
  lanes of an ASAM OpenDRIVE road network: its exact geometry, superelevation and speed zones;
* :func:`cs.build_geometry <curvespeed.geometry.build_geometry>` -- its stations, heading and
  curvature;
* :func:`cs.read_limits <curvespeed.io.limits_toml.read_limits>` -- a limits file (TOML): the
  vehicle's :class:`~curvespeed.limits.Limits` and the route's constraints;
* :func:`cs.plan_profile <curvespeed.planner.plan_profile>` -- the whole route's profile;
* :class:`cs.Replanner <curvespeed.replan.Replanner>` -- receding-horizon windows from the
  vehicle's state;
* :class:`cs.Limits <curvespeed.limits.Limits>`, :class:`cs.RouteConstraints
  <curvespeed.limits.RouteConstraints>`, :class:`cs.Stop <curvespeed.limits.Stop>`,
  :class:`cs.SpeedZone <curvespeed.limits.SpeedZone>` -- limits and constraints in code;
* :class:`cs.CurvespeedError <curvespeed.errors.CurvespeedError>` -- the root of every error.

Profiles support engineering judgment; they do not replace it.
"""

__version__ = "0.1.0"

#: Public name -> (module, attribute), imported on first use (PEP 562).
_FACE = {
    "read_route": ("curvespeed.io", "read_route"),
    "read_opendrive": ("curvespeed.io.opendrive_path", "read_opendrive"),
    "build_geometry": ("curvespeed.geometry", "build_geometry"),
    "read_limits": ("curvespeed.io.limits_toml", "read_limits"),
    "plan_profile": ("curvespeed.planner", "plan_profile"),
    "Replanner": ("curvespeed.replan", "Replanner"),
    "Limits": ("curvespeed.limits", "Limits"),
    "RouteConstraints": ("curvespeed.limits", "RouteConstraints"),
    "Stop": ("curvespeed.limits", "Stop"),
    "SpeedZone": ("curvespeed.limits", "SpeedZone"),
    "CurvespeedError": ("curvespeed.errors", "CurvespeedError"),
}

__all__ = sorted(_FACE)


def __getattr__(name: str):
    try:
        module, attribute = _FACE[name]
    except KeyError:
        raise AttributeError(f"module 'curvespeed' has no attribute {name!r}") from None
    from importlib import import_module     # here: the package's own import stays lean

    value = getattr(import_module(module), attribute)
    globals()[name] = value             # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_FACE))
