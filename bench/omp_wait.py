"""Fit times of the OpenMP models (hgb, lgbm, xgb) with 2 threads, with OpenMP's default wait
policy against ``OMP_WAIT_POLICY=PASSIVE``, on an idle machine and, with ``--busy``, beside
a process that keeps one core busy.

An OpenMP thread that finishes its share of a parallel region spins for a while before it
sleeps (the default, active policy); when another process holds a core, the spinning threads
compete with the one that still has work. PASSIVE makes them sleep at once. This script says
what PASSIVE costs when the machine is idle, and what it saves when it is not, which is what
deciding whether tabpar should set it needs.

The table is a SYNTHETIC stand-in made here from a seeded random generator: 40,000 rows of 30
numeric features and a noisy non-linear regression target. Each run is a new process (the
policy is read when OpenMP starts), the two policies alternate round by round, and each
process fits each model once after one small warm-up fit.

    python bench/omp_wait.py              # idle machine, 3 rounds
    python bench/omp_wait.py --busy       # one core kept busy by a second process
"""
from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import machine  # noqa: E402

FIT = r"""
import json, time
import numpy as np
rng = np.random.default_rng(0)
X = rng.normal(size=(40_000, 30)).astype(np.float32)
y = np.sin(X[:, 0]) * 2 + X[:, 1] * X[:, 2] + rng.normal(size=40_000)
from sklearn.ensemble import HistGradientBoostingRegressor
from lightgbm import LGBMRegressor
from xgboost import XGBRegressor
models = {"hgb": lambda: HistGradientBoostingRegressor(random_state=0),
          "lgbm": lambda: LGBMRegressor(n_jobs=2, random_state=0, verbose=-1),
          "xgb": lambda: XGBRegressor(n_jobs=2, random_state=0)}
seconds = {}
for name, make in models.items():
    make().fit(X[:2000], y[:2000])  # warm-up: thread pools started
    start = time.perf_counter()
    make().fit(X, y)
    seconds[name] = time.perf_counter() - start
print(json.dumps(seconds))
"""

BUSY = "while True: pass"


def run_fits(policy: str | None) -> dict:
    env = {k: v for k, v in os.environ.items() if k != "OMP_WAIT_POLICY"}
    env["OMP_NUM_THREADS"] = "2"
    if policy:
        env["OMP_WAIT_POLICY"] = policy
    done = subprocess.run([sys.executable, "-c", FIT], env=env, capture_output=True, text=True,
                          check=True)
    return json.loads(done.stdout)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=3)
    parser.add_argument("--busy", action="store_true",
                        help="keep one core busy with a second process during the fits")
    args = parser.parse_args()
    busy = subprocess.Popen([sys.executable, "-c", BUSY]) if args.busy else None
    try:
        times = {"default": [], "PASSIVE": []}
        for r in range(args.rounds):
            for policy in (("default", "PASSIVE") if r % 2 == 0 else ("PASSIVE", "default")):
                seconds = run_fits(None if policy == "default" else policy)
                times[policy].append(seconds)
                print(f"round {r + 1}, {policy:8s}: "
                      + ", ".join(f"{m} {s:.2f} s" for m, s in seconds.items()), flush=True)
    finally:
        if busy is not None:
            busy.kill()
    print(f"{'with one core busy' if args.busy else 'idle machine'}: PASSIVE / default fit "
          "time, median over rounds (below 1: PASSIVE faster)")
    for model in times["default"][0]:
        default = np.median([t[model] for t in times["default"]])
        passive = np.median([t[model] for t in times["PASSIVE"]])
        print(f"  {model:5s} {passive / default:6.2f}  ({passive:.2f} s vs {default:.2f} s)")
    print(f"machine: {machine()}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
