"""Plans from many simulated logs of the exact roads, judged on the exact road: one command.

    python benchmarks/log_sweep.py                  # 5 roads x 2 receivers x 5 rates x 2 seeds
    python benchmarks/log_sweep.py --rates 2 --seeds 1

The roads, limits and logs are those of ``benchmarks/exact_roads.py`` (invented design roads;
each driven at its start and end speeds (a log cut from a longer drive where the road
is entered or left at speed) and logged with white noise plus a slowly drifting error,
``tests/drive_logs.py``), over more logging rates and noise draws than its table. Each log is
planned by ``curvespeed plan`` as a user would and the profile judged on the exact road
(``benchmarks/judge.py``). Per receiver the table gives how many plans were made and refused,
the worst use of the lateral limits (lateral acceleration, comfort and friction ellipses,
lateral jerk: what the curvature bound must hold) and of the longitudinal jerk, with the log it
came from. The target of the curvature work is the lateral one: at most 1.01 on the road.
"""

from __future__ import annotations

import argparse
import itertools
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from benchmarks.exact_roads import (  # noqa: E402
    LATERAL_LIMITS, LOG_MARGIN_M, MAX_USE, exact_roads, extended, plan_from_log)
from benchmarks.judge import judge_profile  # noqa: E402

def sweep(rates, seeds) -> dict:
    """Plan and judge every (road, receiver, rate, seed); results per receiver."""
    out: dict = {}
    for case in exact_roads():
        road = extended(case.alignment, LOG_MARGIN_M)
        for receiver, rate, seed in itertools.product(("RTK", "consumer"), rates, seeds):
            label = f"{case.name} {receiver} {rate:g} Hz seed {seed}"
            mine = out.setdefault(receiver, {"plans": [], "refused": []})
            with tempfile.TemporaryDirectory() as tmp:
                try:
                    profile = plan_from_log(case, Path(tmp), receiver, rate, seed=seed)
                except RuntimeError as exc:          # a refusal is a result: keep why
                    mine["refused"].append((label, str(exc).splitlines()[-1]))
                    continue
            judged = judge_profile(profile, road, case.limits)
            lateral = max(judged.use.get(name, 0.0) for name in LATERAL_LIMITS)
            mine["plans"].append((label, lateral, judged.use["jerk"]))
            print(f"  {label}: lateral {lateral:.3f}, jerk {judged.use['jerk']:.3f}",
                  flush=True)
    return out


def table(results: dict) -> str:
    lines = ["| receiver | plans | refused | worst lateral use | worst jerk use | lateral target |",
             "|---|---|---|---|---|---|"]
    for receiver, r in results.items():
        lat = max(r["plans"], key=lambda p: p[1], default=("-", float("nan"), 0.0))
        jerk = max(r["plans"], key=lambda p: p[2], default=("-", 0.0, float("nan")))
        verdict = "PASS" if lat[1] <= MAX_USE else "FAIL"
        lines.append(f"| {receiver} | {len(r['plans'])} | {len(r['refused'])} | "
                     f"{lat[1]:.3f} ({lat[0]}) | {jerk[2]:.3f} ({jerk[0]}) | {verdict} |")
    return "\n".join(lines)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rates", default="1,2,5,10,20", help="logging rates, Hz")
    parser.add_argument("--seeds", default="1,2", help="noise draws")
    args = parser.parse_args(argv)
    rates = [float(r) for r in args.rates.split(",")]
    seeds = [int(s) for s in args.seeds.split(",")]
    t0 = time.perf_counter()
    results = sweep(rates, seeds)
    print(f"\nPlans from simulated logs (rates {args.rates} Hz, seeds {args.seeds}), judged on "
          "the exact road:\n")
    print(table(results))
    for receiver, r in results.items():
        for label, why in r["refused"]:
            print(f"refused: {label}: {why[:200]}")
    print(f"\nbenchmark run time {time.perf_counter() - t0:.0f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
