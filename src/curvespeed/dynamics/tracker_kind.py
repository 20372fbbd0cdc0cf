"""The lateral trackers a replay can use (light: the command line's choices come from here)."""

from __future__ import annotations

import enum


class TrackerKind(enum.Enum):
    """``lqr``: scheduled LQR with curvature feed-forward (:mod:`.lqr`); ``mpc``: linear
    time-varying MPC over a preview horizon, solved with OSQP (:mod:`.mpc`)."""

    LQR = "lqr"
    MPC = "mpc"
