"""``curvespeed plan --qp-backend``: both backends write a profile; a bad choice writes nothing."""

from __future__ import annotations

import json

import numpy as np
from click.testing import CliRunner

from curvespeed.cli.main import cli


def winding_csv(path):
    t = np.linspace(0.0, 1.5 * np.pi, 120)
    x, y = 150.0 * np.cos(t), 150.0 * np.sin(t)
    x = np.concatenate((np.linspace(300.0, 150.0, 30, endpoint=False), x))
    y = np.concatenate((np.zeros(30), y))
    path.write_text("x_m,y_m\n" + "\n".join(f"{a:.3f},{b:.3f}" for a, b in zip(x, y)) + "\n")
    return path


def test_both_backends_write_profiles(tmp_path):
    route = winding_csv(tmp_path / "road.csv")
    times = {}
    for backend in ("banded", "clarabel"):
        out = tmp_path / f"{backend}.csv"
        result = CliRunner().invoke(cli, ["plan", str(route), "--qp-backend", backend,
                                          "-o", str(out)])
        assert result.exit_code == 0, result.output
        assert "convex: optimal" in result.output
        meta = json.loads((tmp_path / f"{backend}.meta.json").read_text())
        assert not [n for n in meta["solver"]["notes"] if "banded" in n]
        times[backend] = meta["total_time_s"]
    # same program, two QP methods: times within 1e-6 of each other (see
    # test_certificate_banded_ipm.TIME_RTOL for the reasoning)
    assert abs(times["banded"] - times["clarabel"]) <= 1e-6 * times["clarabel"]


def test_unknown_backend_is_refused(tmp_path):
    route = winding_csv(tmp_path / "road.csv")
    out = tmp_path / "p.csv"
    result = CliRunner().invoke(cli, ["plan", str(route), "--qp-backend", "fastest",
                                      "-o", str(out)])
    assert result.exit_code == 2
    assert "--qp-backend" in result.output and "banded" in result.output
    assert not out.exists()
