"""Wall time of one `tabpar calibrate` run on a 100,000-row, 30-column table.

The table is a SYNTHETIC stand-in (made here from a seeded random generator, not real data):
one date column (the time holdout), 19 numeric columns (some with gaps), 8 category columns of
3 to 500 levels (some with gaps), one row-id-like integer, and the target — 30 columns in all.
The target is a noisy non-linear function of a few columns, so there is something to learn.

    python bench/calibrate_speed.py                    # regression, the default zoo, 1 seed
    python bench/calibrate_speed.py --type binary
    python bench/calibrate_speed.py --paired OLD/harness --rounds 3

``--paired`` times this code against another checkout's ``harness`` folder (an earlier commit
in a git worktree, say) on the same table, in alternating order (old, new, new, old, ...), each
run with a cold cache, and prints each side's wall times, their medians and the per-round
new/old ratios: the figure for "no slower than before". The other side runs with this
environment's libraries, its own tabpar put first on PYTHONPATH; its output may be one JSON
document (before answers came as JSON Lines).

Runs the console script once, as a user would (imports and all), with --json, which prints one
JSON object per answer as it comes; prints the seconds from the start to the provisional answer
(the naive floor and the histogram boosters) and to the final one, the wall time, the load
average (os.getloadavg) before and after, the machine (cores, memory) and the library versions,
plus the per-phase times from the final answer. Run it on an otherwise idle machine; the
figures go into bench/RESULTS.md under "calibrate".
"""
from __future__ import annotations

import argparse
import json
import os
import platform
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

ROWS = 100_000


def synthetic_table(rows: int = ROWS, task_type: str = "regression", seed: int = 0):
    """A synthetic table of ``rows`` rows and 30 columns (see the module docstring)."""
    rng = np.random.default_rng(seed)
    data = {"opened": pd.Timestamp("2019-01-01")
            + pd.to_timedelta(np.sort(rng.integers(0, 5 * 365, rows)), unit="D")}
    numeric = rng.normal(size=(rows, 19))
    for j in range(19):
        column = numeric[:, j] * (1 + j) + 10 * j
        if j % 5 == 4:  # every fifth numeric column has 8% gaps
            column[rng.random(rows) < 0.08] = np.nan
        data[f"num_{j:02d}"] = column
    levels = (3, 5, 8, 12, 20, 50, 200, 500)
    for j, k in enumerate(levels):
        codes = rng.zipf(1.6, rows) % k
        values = np.array([f"level_{j}_{c}" for c in range(k)], dtype=object)[codes]
        if j % 3 == 2:
            values[rng.random(rows) < 0.05] = None
        data[f"cat_{j}"] = values
    data["ticket_no"] = rng.permutation(rows) + 10_000  # an id: no signal
    frame = pd.DataFrame(data)
    effect = {f"level_1_{c}": v for c, v in enumerate(rng.normal(size=5))}
    signal = (np.sin(numeric[:, 0]) * 2 + numeric[:, 1] * numeric[:, 2]
              + frame["cat_1"].map(effect).to_numpy() + 0.002 * np.arange(rows) / 100)
    noise = rng.normal(scale=1.0, size=rows)
    if task_type == "regression":
        frame["target"] = 50 + 5 * (signal + noise)
    else:
        frame["target"] = np.where(signal + noise > 0.5, "yes", "no")
    assert frame.shape[1] == 30, frame.shape
    return frame


def machine() -> dict:
    try:
        with open("/proc/meminfo") as handle:
            kb = int(next(line for line in handle if line.startswith("MemTotal")).split()[1])
        memory = f"{kb / 1024 / 1024:.1f} GiB"
    except (OSError, StopIteration):
        memory = "unknown"
    try:
        cores = len(os.sched_getaffinity(0))
    except AttributeError:
        cores = os.cpu_count()
    return {"cores": cores, "memory": memory, "cpu": platform.processor() or platform.machine(),
            "os": platform.platform()}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--type", default="regression", choices=["regression", "binary"])
    parser.add_argument("--rows", type=int, default=ROWS)
    parser.add_argument("--keep", action="store_true", help="keep the output folder")
    parser.add_argument("--paired", metavar="HARNESS", type=Path,
                        help="another checkout's harness folder to time against this code")
    parser.add_argument("--rounds", type=int, default=3, help="paired rounds (with --paired)")
    args = parser.parse_args()
    if args.paired is not None:
        return paired(args)

    from tabpar.execution.provenance import library_versions

    work = Path(tempfile.mkdtemp(prefix="tabpar-bench-calibrate-"))
    data = work / "synthetic.parquet"
    synthetic_table(args.rows, args.type).to_parquet(data, index=False)
    out = work / "out"
    command = _calibrate_command(data, out, args.type)
    env = dict(os.environ, TABPAR_CACHE=str(work / "cache"))  # a cold cache, as a first run
    load_before = os.getloadavg()
    answers = []  # (seconds from the start, answer) as each line arrives
    with open(work / "stderr.txt", "w+") as stderr:
        t0 = time.perf_counter()
        with subprocess.Popen(command, env=env, stdout=subprocess.PIPE, stderr=stderr,
                              text=True) as process:
            for line in process.stdout:
                answers.append((time.perf_counter() - t0, json.loads(line)))
        seconds = time.perf_counter() - t0
        if process.returncode != 0:
            stderr.seek(0)
            print(stderr.read(), file=sys.stderr)
            return process.returncode
    load_after = os.getloadavg()
    report = answers[-1][1]
    assert report["final"] is True, "the last answer must be the final one"
    print(f"tabpar calibrate, synthetic {args.type} table of {args.rows:,} rows x 30 columns, "
          f"time holdout, the default zoo, 1 seed: {seconds:.1f} s wall")
    for at, answer in answers:
        kind = "final" if answer["final"] else "provisional"
        print(f"  {kind} answer at {at:.1f} s: rests on {', '.join(answer['rests_on'])}"
              + (f"; pending {', '.join(answer['pending'])} and "
                 f"{len(answer['diagnostics_pending'])} diagnostics"
                 if not answer["final"] else "")
              + f" (verdict {answer['score_verdict']}, par {answer['par']:.4g}, "
                f"best {answer['best']:.4g})")
    print("  load average (1, 5, 15 min) before: "
          + ", ".join(f"{x:.2f}" for x in load_before)
          + "; after: " + ", ".join(f"{x:.2f}" for x in load_after))
    print(f"  split: {report['split']}")
    print("  diagnostics: " + ", ".join(f"{d['name']} {d['seconds']:.1f} s"
                                        for d in report["diagnostics"]))
    print("  models (fit s): " + ", ".join(f"{m} {s['fit_seconds']:.1f}"
                                           for m, s in report["baseline"].items()))
    if report["skipped"]:
        print(f"  skipped: {report['skipped']}")
    print(f"  verdict {report['score_verdict']}, dataset {report['dataset']}")
    print(f"  machine: {json.dumps(machine())}")
    print(f"  versions: {json.dumps(library_versions())}")
    if args.keep:
        print(f"  output kept in {out}")
    else:
        shutil.rmtree(work, ignore_errors=True)
    return 0


def _calibrate_command(data: Path, out: Path, task_type: str) -> list:
    score = "60" if task_type == "regression" else "0.7"
    script = Path(sys.executable).parent / "tabpar"  # the console script of this environment
    launcher = [str(script)] if script.exists() else [sys.executable, "-m", "tabpar.cli.main"]
    return launcher + ["calibrate", str(data), "--target", "target", "--date", "opened",
                       "--score", score, "--seeds", "1", "--out", str(out), "--json"]


def _final_answer(stdout: str) -> dict:
    """The last answer printed: JSON Lines now, one indented document before."""
    lines = [line for line in stdout.splitlines() if line.strip()]
    try:
        return json.loads(lines[-1])
    except (IndexError, json.JSONDecodeError):
        return json.loads(stdout)


def paired(args) -> int:
    """Alternating cold-cache runs of the other checkout ("old") and this code ("new")."""
    harness = args.paired.resolve()
    if not (harness / "tabpar" / "__init__.py").is_file():
        print(f"--paired {args.paired}: no tabpar package in that folder; give the harness "
              f"folder of another checkout", file=sys.stderr)
        return 2
    work = Path(tempfile.mkdtemp(prefix="tabpar-bench-calibrate-paired-"))
    data = work / "synthetic.parquet"
    synthetic_table(args.rows, args.type).to_parquet(data, index=False)
    walls = {"old": [], "new": []}
    order = [side for r in range(args.rounds)
             for side in (("old", "new") if r % 2 == 0 else ("new", "old"))]
    for i, side in enumerate(order):
        env = dict(os.environ, TABPAR_CACHE=str(work / f"cache{i}"))
        if side == "old":
            env["PYTHONPATH"] = os.pathsep.join(
                p for p in (str(harness), os.environ.get("PYTHONPATH")) if p)
        load = os.getloadavg()[0]
        t0 = time.perf_counter()
        run = subprocess.run(_calibrate_command(data, work / f"out{i}", args.type), env=env,
                             capture_output=True, text=True)
        seconds = time.perf_counter() - t0
        if run.returncode != 0:
            print(run.stderr, file=sys.stderr)
            return run.returncode
        final = _final_answer(run.stdout)
        walls[side].append(seconds)
        fits = ", ".join(f"{m} {v['fit_seconds']:.1f}" for m, v in final["baseline"].items())
        print(f"run {i + 1} ({side}): {seconds:.1f} s wall [load {load:.2f}]; fits (s): {fits}",
              flush=True)
    ratios = [new / old for old, new in zip(walls["old"], walls["new"])]
    median = {side: float(np.median(w)) for side, w in walls.items()}
    print(f"median wall: old {median['old']:.1f} s, new {median['new']:.1f} s; new/old "
          f"{median['new'] / median['old']:.3f} (per round: "
          + ", ".join(f"{r:.2f}" for r in ratios) + ")")
    print(f"machine: {json.dumps(machine())}")
    shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
