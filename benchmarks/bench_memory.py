"""Peak memory of a large bootstrap sweep: the accumulators stream, predictions are never held.

Runs ``cx.sweep`` on a polynomial ladder with bootstrap B x n evaluation points x C capacities in a
fresh subprocess and reports that process's peak resident set size (``resource.getrusage``,
``ru_maxrss``), next to a baseline subprocess that does everything except the sweep (imports, data)
and next to what holding every prediction would take (B x n x C doubles).

Default size (the target case): B = 1,000 resamples, n = 100,000 points, C = 20 degrees, exact
engine; target peak <= 1 GB. Smaller runs and the generic engine are one flag away::

    python benchmarks/bench_memory.py                                   # target case, exact path
    python benchmarks/bench_memory.py --engine generic --n-resamples 50 --n-points 20000

Linux only (``ru_maxrss`` is in KiB there).
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
TARGET_MB = 1024.0

CHILD = r"""
import json, resource, sys, time, warnings
sys.path.insert(0, {repo!r})
import numpy as np
import complexity as cx

n, B, C, engine, do_sweep = {n}, {B}, {C}, {engine!r}, {do_sweep}
rng = np.random.default_rng(0)
x = rng.uniform(-20.0, 60.0, n)                      # synthetic: offset vs temperature
y = 0.3 * np.tanh((x - 20.0) / 12.0) + 0.002 * x + rng.normal(0.0, 0.04, n)
X = x.reshape(-1, 1)
seconds = 0.0
if do_sweep:
    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = cx.sweep(cx.PolynomialLadder(range(0, C)), X, y, plan=cx.Bootstrap(B),
                          engine=engine, noise=0.0016, random_state=0, n_jobs=1)
    seconds = time.perf_counter() - start
    assert np.all(np.isfinite(result.curves["test_mse"])), "non-finite test error"
    engine = result.metadata["engine"]
peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
print(json.dumps({{"peak_mb": peak_mb, "seconds": seconds, "engine": engine}}))
"""


def _child(n: int, B: int, C: int, engine: str, do_sweep: bool) -> dict:
    code = CHILD.format(repo=str(REPO), n=n, B=B, C=C, engine=engine, do_sweep=do_sweep)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=False)
    if out.returncode != 0:
        raise SystemExit(f"benchmark subprocess failed:\n{out.stderr[-3000:]}")
    return json.loads(out.stdout.strip().splitlines()[-1])


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--engine", default="exact", choices=["exact", "generic", "auto"])
    parser.add_argument("--n-resamples", type=int, default=1000)
    parser.add_argument("--n-points", type=int, default=100_000)
    parser.add_argument("--n-capacities", type=int, default=20)
    args = parser.parse_args(argv)
    B, n, C = args.n_resamples, args.n_points, args.n_capacities

    started = time.perf_counter()
    base = _child(n, B, C, args.engine, do_sweep=False)
    run = _child(n, B, C, args.engine, do_sweep=True)
    held_mb = B * n * C * 8 / 2**20

    rows = [
        ("baseline (imports + data, no sweep)", base["peak_mb"], float("nan")),
        (f"sweep, {run['engine']} engine", run["peak_mb"], run["seconds"]),
    ]
    print(f"bootstrap {B:,} resamples x {n:,} evaluation points x {C} capacities")
    print(f"{'process':<40} {'peak RSS (MB)':>14} {'sweep (s)':>10}")
    for name, mb, sec in rows:
        print(f"{name:<40} {mb:>14.1f} {sec:>10.1f}")
    print(f"{'sweep minus baseline':<40} {run['peak_mb'] - base['peak_mb']:>14.1f}")
    print(f"{'holding every prediction would need':<40} {held_mb:>14.1f}")
    ok = run["peak_mb"] <= TARGET_MB
    print(
        f"target: peak <= {TARGET_MB:.0f} MB -> {'met' if ok else 'NOT met'} "
        f"(peak / target = {run['peak_mb'] / TARGET_MB:.2f}; "
        f"held predictions / peak = {held_mb / run['peak_mb']:.1f}x)"
    )
    print(f"total benchmark time {time.perf_counter() - started:.0f} s")
    return 0 if ok else 1


if __name__ == "__main__":
    raise SystemExit(main())
