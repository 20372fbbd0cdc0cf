"""The dynamic single-track (bicycle) vehicle model, its tyre curves and its steering actuator.

States (SI, plan frame x/y, body frame for velocities)::

    x_m, y_m          position of the centre of gravity
    yaw_rad           heading of the body, counter-clockwise from +x
    vx_mps, vy_mps    velocity of the centre of gravity along and across the body (left +)
    yaw_rate_radps    r
    steer_rad         road-wheel steering angle of the front axle (left +)

Inputs: the steering command (road-wheel angle) and the total longitudinal force.

Dynamic single-track model (textbook vehicle dynamics; e.g. Rajamani, Vehicle Dynamics and
Control, 2012, chapter 2, from memory), one lumped tyre per axle, ``a``/``b`` the distances
from the centre of gravity to the front/rear axle::

    alpha_f = delta - atan2(vy + a r, vx)          alpha_r = -atan2(vy - b r, vx)
    m (dvx/dt - vy r) = Fx_f cos delta - Fy_f sin delta + Fx_r
    m (dvy/dt + vx r) = Fy_f cos delta + Fx_f sin delta + Fy_r
    Iz dr/dt          = a (Fy_f cos delta + Fx_f sin delta) - b Fy_r

The longitudinal force is shared between the axles in proportion to their static loads
(``m g b / L`` front, ``m g a / L`` rear; no load transfer: the model has no height of the
centre of gravity), each axle's share held within ``mu F_z``. Each axle's lateral force follows
its tyre curve up to what the friction ellipse (a circle here: one friction coefficient both
ways) leaves beside the longitudinal force, ``sqrt((mu F_z)^2 - F_x^2)``:

* :attr:`TyreCurve.BRUSH`: the brush model with a parabolic pressure distribution (Fiala, 1954;
  Pacejka, Tyre and Vehicle Dynamics, 2012), with ``z = tan(alpha)``::

      F = C z - C^2 |z| z / (3 F_max) + C^3 z^3 / (27 F_max^2)   for |z| < 3 F_max / C,
      F = F_max sign(z)                                           beyond;

* :attr:`TyreCurve.SATURATED_LINEAR`: ``F = C alpha`` clipped at ``+-F_max``.

Low speed: the slip angles are undefined at standstill and the equations stiffen as ``1/vx``.
Below :data:`KINEMATIC_BELOW_MPS` the model is the kinematic bicycle (no tyre slip:
``r = vx tan(delta) / L``, ``vy = b r``, ``dvx/dt = F_x / m``); between that and
:data:`DYNAMIC_ABOVE_MPS` the two sets of derivatives are blended linearly in speed. The
kinematic part carries the derivative of its own constraints plus a relaxation onto them (time
constant :data:`KINEMATIC_RELAX_S`), so a state that leaves the dynamic region lands on the
kinematic one smoothly. The vehicle never reverses: at rest a braking force holds it.

Steering actuator: a first-order lag ``ddelta/dt = (delta_cmd - delta) / steer_lag_s``, its rate
held within ``+-max_steer_rate_radps``; the command is held within ``+-max_steer_rad``.

Derivatives are written on Python floats with :mod:`math`: the simulation evaluates them one
state at a time, where numpy's per-call overhead would dominate.
"""

from __future__ import annotations

import cmath
import enum
import math
from dataclasses import dataclass

from ..limits import PHYSICAL_RANGES
from ..units import STANDARD_GRAVITY_MPS2

#: Below this speed (m/s) the model is purely kinematic.
KINEMATIC_BELOW_MPS = 1.0
#: Above this speed (m/s) the model is purely dynamic; linear blend in between.
DYNAMIC_ABOVE_MPS = 3.0
#: Time constant (s) pulling lateral velocity and yaw rate onto the kinematic model's values.
KINEMATIC_RELAX_S = 0.05


class TyreCurve(enum.Enum):
    """Lateral tyre force against slip angle (module docstring)."""

    BRUSH = "brush"
    SATURATED_LINEAR = "saturated_linear"


@dataclass(frozen=True)
class Vehicle:
    """Parameters of the single-track model (the keys of a vehicle file's ``[vehicle]`` table).

    The defaults are a mid-size passenger car: values of the kind textbook examples use,
    recalled from memory, not measured on any vehicle.

    Attributes
    ----------
    mass_kg : float
    yaw_inertia_kgm2 : float
        Moment of inertia about the vertical axis through the centre of gravity, kg m^2.
    front_axle_to_cg_m, rear_axle_to_cg_m : float
        Distances ``a``, ``b`` from the centre of gravity to the front and rear axle, m.
    front_cornering_stiffness_npr, rear_cornering_stiffness_npr : float
        Cornering stiffness of the whole axle (both tyres), N/rad.
    friction_coefficient : float
        Tyre-road friction coefficient ``mu``.
    max_steer_rad : float
        Largest road-wheel steering angle, rad.
    max_steer_rate_radps : float
        Largest steering rate, rad/s.
    steer_lag_s : float
        Time constant of the steering actuator's first-order lag, s.
    tyre_curve : TyreCurve
        Shape of the lateral force against slip angle.
    gravity_mps2 : float
    """

    mass_kg: float = 1500.0
    yaw_inertia_kgm2: float = 2500.0
    front_axle_to_cg_m: float = 1.2
    rear_axle_to_cg_m: float = 1.6
    front_cornering_stiffness_npr: float = 140000.0
    rear_cornering_stiffness_npr: float = 160000.0
    friction_coefficient: float = 0.9
    max_steer_rad: float = 0.6
    max_steer_rate_radps: float = 0.8
    steer_lag_s: float = 0.1
    tyre_curve: TyreCurve = TyreCurve.BRUSH
    gravity_mps2: float = STANDARD_GRAVITY_MPS2

    @property
    def wheelbase_m(self) -> float:
        return self.front_axle_to_cg_m + self.rear_axle_to_cg_m

    @property
    def front_load_n(self) -> float:
        """Static normal load on the front axle, N."""
        return self.mass_kg * self.gravity_mps2 * self.rear_axle_to_cg_m / self.wheelbase_m

    @property
    def rear_load_n(self) -> float:
        """Static normal load on the rear axle, N."""
        return self.mass_kg * self.gravity_mps2 * self.front_axle_to_cg_m / self.wheelbase_m

    @property
    def understeer_gradient_radpmps2(self) -> float:
        """``K_us = m b / (L C_f) - m a / (L C_r)``, rad per m/s^2 of lateral acceleration."""
        m, L = self.mass_kg, self.wheelbase_m
        return (m * self.rear_axle_to_cg_m / (L * self.front_cornering_stiffness_npr)
                - m * self.front_axle_to_cg_m / (L * self.rear_cornering_stiffness_npr))


DEFAULT_VEHICLE = Vehicle()


def lateral_force(alpha: float, stiffness: float, f_max: float, curve: TyreCurve) -> float:
    """Lateral force (N) of an axle at slip angle ``alpha`` (rad), at most ``f_max`` (N)."""
    if f_max <= 0.0:
        return 0.0
    if curve is TyreCurve.SATURATED_LINEAR:
        return max(-f_max, min(f_max, stiffness * alpha))
    z = math.tan(alpha)
    if abs(z) >= 3.0 * f_max / stiffness:
        return math.copysign(f_max, z)
    q = stiffness * z / f_max
    return f_max * (q - q * abs(q) / 3.0 + q * q * q / 27.0)


class VehicleModel:
    """The model's equations (module docstring) with the vehicle's constants unpacked once:
    the simulation calls them four times per integration step.

    Parameters
    ----------
    vehicle : Vehicle
    """

    def __init__(self, vehicle: Vehicle):
        self.vehicle = vehicle
        self.m, self.inertia = vehicle.mass_kg, vehicle.yaw_inertia_kgm2
        self.a, self.b = vehicle.front_axle_to_cg_m, vehicle.rear_axle_to_cg_m
        self.wheelbase = vehicle.wheelbase_m
        self.cf = vehicle.front_cornering_stiffness_npr
        self.cr = vehicle.rear_cornering_stiffness_npr
        self.set_friction(vehicle.friction_coefficient)
        self.share_f = self.b / self.wheelbase
        self.curve = vehicle.tyre_curve
        self.lag, self.rate = vehicle.steer_lag_s, vehicle.max_steer_rate_radps

    def set_friction(self, mu: float) -> None:
        """Drive on from here with the tyre-road friction ``mu`` (a wet patch, a friction
        section of the plan): each axle's force is then held within ``mu F_z``."""
        self.mu = mu
        self.cap_f = mu * self.vehicle.front_load_n
        self.cap_r = mu * self.vehicle.rear_load_n

    def split(self, force_x: float):
        """The longitudinal force per axle (each within ``mu F_z``) and the lateral force each
        axle has left: ``(fx_f, fx_r, fy_max_f, fy_max_r)``."""
        cap_f, cap_r = self.cap_f, self.cap_r
        fx_f = max(-cap_f, min(cap_f, force_x * self.share_f))
        fx_r = max(-cap_r, min(cap_r, force_x * (1.0 - self.share_f)))
        return (fx_f, fx_r, math.sqrt(max(cap_f * cap_f - fx_f * fx_f, 0.0)),
                math.sqrt(max(cap_r * cap_r - fx_r * fx_r, 0.0)))

    def forces(self, vx, vy, r, delta, split):
        """Slip angles and lateral forces of both axles: ``(alpha_f, alpha_r, fy_f, fy_r)``
        (dynamic model, ``vx > 0``)."""
        alpha_f = delta - math.atan2(vy + self.a * r, vx)
        alpha_r = -math.atan2(vy - self.b * r, vx)
        return (alpha_f, alpha_r, lateral_force(alpha_f, self.cf, split[2], self.curve),
                lateral_force(alpha_r, self.cr, split[3], self.curve))

    def accelerations(self, vx, vy, r, delta, split):
        """``(dvx/dt, dvy/dt, dr/dt)`` of the dynamic model, ``vx > 0``."""
        _, _, fy_f, fy_r = self.forces(vx, vy, r, delta, split)
        fx_f, fx_r = split[0], split[1]
        c, s = math.cos(delta), math.sin(delta)
        front_lat = fy_f * c + fx_f * s
        m = self.m
        return ((fx_f * c - fy_f * s + fx_r) / m + vy * r, (front_lat + fy_r) / m - vx * r,
                (self.a * front_lat - self.b * fy_r) / self.inertia)

    def derivatives(self, state, command: float, force_x: float, split):
        """Time derivative of ``state`` under the steering ``command`` (within the angle
        limit) and the longitudinal force ``force_x`` (``split`` = :meth:`split` of it)."""
        _, _, yaw, vx, vy, r, delta = state
        ddelta = (command - delta) / self.lag
        ddelta = -self.rate if ddelta < -self.rate else (self.rate if ddelta > self.rate
                                                         else ddelta)
        w = dynamic_weight(vx)
        if w > 0.0:
            dvx, dvy, dr = self.accelerations(vx, vy, r, delta, split)
        else:
            dvx = dvy = dr = 0.0
        if w < 1.0:
            t = math.tan(delta)
            ax_kin = force_x / self.m
            if vx <= 0.0 and ax_kin < 0.0:
                ax_kin = 0.0          # held at rest (below)
            r_kin = vx * t / self.wheelbase
            # d/dt of r = vx tan(delta) / L and vy = b r, plus the relaxation onto them
            along = (ax_kin * t + vx * ddelta * (1.0 + t * t)) / self.wheelbase
            dr_kin = along + (r_kin - r) / KINEMATIC_RELAX_S
            dvy_kin = self.b * along + (self.b * r_kin - vy) / KINEMATIC_RELAX_S
            dvx = w * dvx + (1.0 - w) * ax_kin
            dvy = w * dvy + (1.0 - w) * dvy_kin
            dr = w * dr + (1.0 - w) * dr_kin
        if vx <= 0.0 and dvx < 0.0:
            dvx = 0.0                 # at rest the brakes hold: no reversing
        c, s = math.cos(yaw), math.sin(yaw)
        return (vx * c - vy * s, vx * s + vy * c, r, dvx, dvy, dr, ddelta)

    def step(self, state, command: float, force_x: float, dt: float):
        """One classical fourth-order Runge-Kutta step of ``dt`` seconds, inputs held."""
        split = self.split(force_x)
        f = self.derivatives
        k1 = f(state, command, force_x, split)
        h = 0.5 * dt
        k2 = f(tuple([x + h * d for x, d in zip(state, k1)]), command, force_x, split)
        k3 = f(tuple([x + h * d for x, d in zip(state, k2)]), command, force_x, split)
        k4 = f(tuple([x + dt * d for x, d in zip(state, k3)]), command, force_x, split)
        sixth = dt / 6.0
        new = [x + sixth * (d1 + 2.0 * (d2 + d3) + d4)
               for x, d1, d2, d3, d4 in zip(state, k1, k2, k3, k4)]
        if new[3] < 0.0:
            new[3] = 0.0
        return tuple(new)


def axle_forces(vehicle: Vehicle, vx, vy, r, delta, force_x):
    """Slip angles, longitudinal and lateral forces of both axles (dynamic model, ``vx > 0``).

    Returns ``(alpha_f, alpha_r, fx_f, fx_r, fy_f, fy_r)``.
    """
    model = VehicleModel(vehicle)
    split = model.split(force_x)
    alpha_f, alpha_r, fy_f, fy_r = model.forces(vx, vy, r, delta, split)
    return alpha_f, alpha_r, split[0], split[1], fy_f, fy_r


def dynamic_accelerations(vehicle: Vehicle, vx, vy, r, delta, force_x):
    """``(dvx/dt, dvy/dt, dr/dt)`` of the dynamic model (module docstring), ``vx > 0``."""
    model = VehicleModel(vehicle)
    return model.accelerations(vx, vy, r, delta, model.split(force_x))


def dynamic_weight(vx: float) -> float:
    """Weight of the dynamic model in the blend: 0 below, 1 above the blending band."""
    w = (vx - KINEMATIC_BELOW_MPS) / (DYNAMIC_ABOVE_MPS - KINEMATIC_BELOW_MPS)
    return 0.0 if w <= 0.0 else (1.0 if w >= 1.0 else w)


def steer_rate(vehicle: Vehicle, delta: float, command: float) -> float:
    """The actuator's steering rate (rad/s) towards ``command`` (already within the angle
    limit)."""
    rate = (command - delta) / vehicle.steer_lag_s
    limit = vehicle.max_steer_rate_radps
    return -limit if rate < -limit else (limit if rate > limit else rate)


def derivatives(vehicle: Vehicle, state, command: float, force_x: float):
    """Time derivative of ``state`` (module docstring's order) under the steering ``command``
    (rad, within the angle limit) and the total longitudinal force ``force_x`` (N)."""
    model = VehicleModel(vehicle)
    return model.derivatives(state, command, force_x, model.split(force_x))


def rk4_step(vehicle: Vehicle, state, command: float, force_x: float, dt: float):
    """One classical fourth-order Runge-Kutta step of ``dt`` seconds, inputs held."""
    return VehicleModel(vehicle).step(state, command, force_x, dt)


def tyre_use(model: VehicleModel, vx, vy, r, delta, force_x):
    """Slip angles and tyre use (force over ``mu F_z``; 1 = saturated) of both axles.

    Returns ``(alpha_f, alpha_r, use_f, use_r)``. In the kinematic band the lateral forces are
    those the kinematic motion needs (``m vx r`` shared by the axles' loads), blended as the
    derivatives are.
    """
    split = model.split(force_x)
    fx_f, fx_r = split[0], split[1]
    if vx > 0.0:
        alpha_f, alpha_r, fy_f, fy_r = model.forces(vx, vy, r, delta, split)
    else:
        alpha_f = alpha_r = fy_f = fy_r = 0.0
    w = dynamic_weight(vx)
    if w < 1.0:
        need = model.m * vx * r
        fy_f = w * fy_f + (1.0 - w) * need * model.share_f
        fy_r = w * fy_r + (1.0 - w) * need * (1.0 - model.share_f)
    return (alpha_f, alpha_r, math.hypot(fx_f, fy_f) / model.cap_f,
            math.hypot(fx_r, fy_r) / model.cap_r)


#: Step of the replay's Runge-Kutta integration, s (``ReplaySettings.integration_dt_s``).
INTEGRATION_STEP_S = 0.01

#: Ranges a parameter must lie in, with the reason (common practice; the steering lag's lower
#: bound keeps the lag resolved by the 0.01 s integration step; friction and gravity as the
#: planner's limits have them, :data:`curvespeed.limits.PHYSICAL_RANGES`).
PARAMETER_RANGES = {
    "mass_kg": (1.0, 1e6, "from a small robot to the heaviest road vehicles"),
    "yaw_inertia_kgm2": (0.01, 1e8, "a passenger car has about 2,000-3,500 kg m^2"),
    "front_axle_to_cg_m": (0.05, 20.0, "a passenger car has 1-1.6 m"),
    "rear_axle_to_cg_m": (0.05, 20.0, "a passenger car has 1-1.8 m"),
    "front_cornering_stiffness_npr": (100.0, 1e7, "a passenger car axle has about "
                                      "100,000-200,000 N/rad"),
    "rear_cornering_stiffness_npr": (100.0, 1e7, "a passenger car axle has about "
                                     "100,000-200,000 N/rad"),
    "friction_coefficient": PHYSICAL_RANGES["friction_coefficient"],
    "max_steer_rad": (0.01, 1.2, "road wheels steer up to about 0.6 rad (35 degrees); "
                      "1.2 rad is near the kinematic model's 90-degree singularity"),
    "max_steer_rate_radps": (0.01, 20.0, "steering actuators turn the road wheels at about "
                             "0.3-1 rad/s"),
    "steer_lag_s": (0.02, 5.0, "steering actuators lag by about 0.05-0.3 s; below 0.02 s the "
                    "0.01 s integration step cannot resolve the lag"),
    "gravity_mps2": PHYSICAL_RANGES["gravity_mps2"],
}


def check_parameter(name: str, value, where: str = "vehicle") -> None:
    """Raise :class:`~curvespeed.errors.VehicleError` naming ``where`` and the parameter when
    ``value`` is no finite number within its :data:`PARAMETER_RANGES` entry."""
    from ..errors import VehicleError

    low, high, why = PARAMETER_RANGES[name]
    if not (isinstance(value, (int, float)) and not isinstance(value, bool)
            and math.isfinite(value) and low <= value <= high):
        raise VehicleError(f"{where}: {name} = {value!r} is outside {low:g}..{high:g} "
                           f"({why}); give a value in that range")


def validate_vehicle(vehicle: Vehicle, where: str = "vehicle") -> Vehicle:
    """Raise :class:`~curvespeed.errors.VehicleError` naming ``where`` when a parameter lies
    outside :data:`PARAMETER_RANGES` or the tyre curve is none of :class:`TyreCurve`; return
    ``vehicle``."""
    from ..errors import VehicleError

    for name in PARAMETER_RANGES:
        check_parameter(name, getattr(vehicle, name), where)
    if not isinstance(vehicle.tyre_curve, TyreCurve):
        raise VehicleError(f"{where}: tyre_curve = {vehicle.tyre_curve!r} is not a TyreCurve; "
                           f"give one of {', '.join(f'TyreCurve.{c.name}' for c in TyreCurve)}")
    return vehicle


#: The most Runge-Kutta steps :func:`integration_step` splits the replay's step into.
MAX_SUBSTEPS = 32


def integration_step(vehicle: Vehicle, dt: float, where: str = "vehicle") -> float:
    """The replay's integration step for ``vehicle``: ``dt`` where the Runge-Kutta step follows
    its lateral motion (:func:`lateral_step_problem`), else the longest ``dt / m`` that does,
    ``m`` up to :data:`MAX_SUBSTEPS`. A light vehicle on car tyres needs a few (500 kg on the
    built-in car's: the 0.01 s step made a slip that dies out in milliseconds grow instead);
    one that no such step follows is refused (:class:`~curvespeed.errors.VehicleError`
    naming ``where``): its values are far from any road vehicle's."""
    from ..errors import VehicleError

    for m in range(1, MAX_SUBSTEPS + 1):
        if lateral_step_problem(vehicle, dt / m) is None:
            return dt / m
    raise VehicleError(f"{where}: {lateral_step_problem(vehicle, dt / MAX_SUBSTEPS)}")


#: Speeds at which :func:`lateral_step_problem` looks at the lateral motion, m/s: from where the
#: dynamic model starts to weigh in to the planner's highest top speed, geometric.
_CHECK_SPEEDS_MPS = tuple(KINEMATIC_BELOW_MPS * 1000.0 ** (i / 240) for i in range(241))


def lateral_step_problem(vehicle: Vehicle, dt: float) -> str | None:
    """Why the classical Runge-Kutta step ``dt`` cannot follow the vehicle's lateral motion,
    or None.

    The motion across the path and in yaw near zero slip is linear in ``(vy, r)`` (linear tyres
    of the module docstring's model, e.g. Rajamani 2012, chapter 2, from memory)::

        A = [[-(Cf + Cr) / (m vx),        -(a Cf - b Cr) / (m vx) - vx],
             [-(a Cf - b Cr) / (Iz vx),   -(a^2 Cf + b^2 Cr) / (Iz vx)]]

    weighed by :func:`dynamic_weight` and blended with the kinematic relaxation. A step
    multiplies a mode ``exp(lambda t)`` by ``R(z) = 1 + z + z^2/2 + z^3/6 + z^4/24``,
    ``z = lambda dt``; where a mode that dies out (``Re lambda < 0``) would grow
    (``|R(z)| > 1``), the replay integrates numbers, not the vehicle: its slip and tyre use
    chatter, and tyres far stiffer than the mass and inertia they carry (a 1 kg vehicle on a
    car's tyres; 0.01 kg m^2 of yaw inertia under 1,000 t) lost the path at once or drove the
    lateral error to 1e11 m.
    """
    m, inertia = vehicle.mass_kg, vehicle.yaw_inertia_kgm2
    a, b = vehicle.front_axle_to_cg_m, vehicle.rear_axle_to_cg_m
    cf, cr = vehicle.front_cornering_stiffness_npr, vehicle.rear_cornering_stiffness_npr
    for v in _CHECK_SPEEDS_MPS:
        w = dynamic_weight(v)
        a11, a12 = -(cf + cr) / (m * v), -(a * cf - b * cr) / (m * v) - v
        a21, a22 = -(a * cf - b * cr) / (inertia * v), -(a * a * cf + b * b * cr) / (inertia * v)
        half = 0.5 * (a11 + a22)
        root = cmath.sqrt(half * half - (a11 * a22 - a12 * a21))
        for mode in (half + root, half - root):
            mode = w * mode - (1.0 - w) / KINEMATIC_RELAX_S
            if mode.real < 0.0 and abs(_rk4_factor(mode * dt)) > 1.0:
                return _too_stiff(vehicle, dt, v, mode)
    return None


def _rk4_factor(z: complex) -> complex:
    """What one classical Runge-Kutta step multiplies ``exp(lambda t)`` by, ``z = lambda dt``."""
    return 1.0 + z * (1.0 + z * (0.5 + z * (1.0 / 6.0 + z / 24.0)))


def _too_stiff(vehicle: Vehicle, dt: float, v: float, mode: complex) -> str:
    per_load = (vehicle.front_cornering_stiffness_npr / vehicle.front_load_n,
                vehicle.rear_cornering_stiffness_npr / vehicle.rear_load_n)
    index = vehicle.yaw_inertia_kgm2 / (
        vehicle.mass_kg * vehicle.front_axle_to_cg_m * vehicle.rear_axle_to_cg_m)
    return (f"even a {dt:.3g} s integration step cannot follow this vehicle's lateral "
            f"motion: at {v:.1f} m/s a slip settles within {1000.0 / -mode.real:.3g} ms and the "
            "step would make it grow instead. Its axles' cornering stiffness over their static "
            f"loads is {per_load[0]:.3g} and {per_load[1]:.3g} per rad (car tyres about 10-30), "
            f"its yaw inertia over m a b {index:.3g} (road vehicles about 1); check mass_kg, "
            "yaw_inertia_kgm2 and the cornering stiffnesses (whole axle, N/rad)")
