"""Benchmark of sampling: 10^5 points of a step response once the closed form
exists, side by side with scipy.signal.step on the same system and grid.

    python -m sheetfuncs.benchmarks.sampling

Target: under 5 ms per 10^5 points (the core issue's figure).  Figures go in docs/benchmarks.md.
"""
from __future__ import annotations

import time

import numpy as np

CASES = [
    ("underdamped 2nd order", "4/(s^2+1.2s+4)", [4.0], [1.0, 1.2, 4.0]),
    ("3 lags", "10/((s+1)(0.5s+1)(0.2s+1))", [10.0], [0.1, 0.8, 1.7, 1.0]),
    ("order 6 mixed", "(s+3)/((s^2+0.4s+1)(s^2+2s+5)(s+2)^2)", [1.0, 3.0],
     list(np.polymul(np.polymul([1, 0.4, 1], [1, 2, 5]), [1, 4, 4]))),
]


def _best(fn, runs=5):
    best = float("inf")
    for _ in range(runs):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def main(argv=None) -> int:
    from scipy import signal

    from ..engine.sample import response_result, sample_result

    def evaluate(res, grid):
        return sample_result(res, grid).y
    t = np.linspace(0.0, 20.0, 100_000)
    print(f"{'case':24s} {'engine ms':>10s} {'scipy ms':>10s} {'ratio':>7s} {'max |diff|':>11s}")
    for label, expr, num, den in CASES:
        res = response_result(expr, None, "step")
        evaluate(res, t[:10])                              # compile once (closed form exists)
        te, ours = _best(lambda: evaluate(res, t))
        ts, (_, ref) = _best(lambda: signal.step(signal.lti(num, den), T=t), runs=2)
        print(f"{label:24s} {te * 1e3:10.2f} {ts * 1e3:10.2f} {ts / te:6.1f}x "
              f"{np.max(np.abs(ours - ref)):11.1e}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
