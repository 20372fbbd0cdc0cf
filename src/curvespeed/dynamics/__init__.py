"""Vehicle dynamics for closed-loop replay of a profile (core numerics).

* :mod:`.vehicle`: the dynamic single-track model, its tyre curves, steering actuator, the
  low-speed blend to the kinematic model, the Runge-Kutta step;
* :mod:`.path`: projection of a position onto the planned path;
* :mod:`.lqr`: the lateral path-error model and the scheduled LQR tracker;
* :mod:`.mpc`: the linear time-varying MPC tracker (OSQP);
* :mod:`.simulate`: the closed loop (:func:`~.simulate.replay`) and its result;
* :mod:`.summary`: errors, tyre use and steering saturation of a replay.

Submodules are imported on use, so that importing the package loads no numerics.
"""
