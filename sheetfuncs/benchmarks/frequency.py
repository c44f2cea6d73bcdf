"""Benchmark of the frequency response: 10^4 log-spaced frequencies of F(jw)
(complex value, magnitude in dB, continuous phase, group delay) once the model
exists, side by side with scipy.signal.freqs (complex value, then dB and
np.unwrap of the angle) on the same system and grid.

    python -m sheetfuncs.benchmarks.frequency

Target: under 10 ms per 10^4 points.  Figures go in docs/benchmarks.md.
"""
from __future__ import annotations

import time

import numpy as np

N = 10_000

CASES = [
    ("underdamped 2nd order", "4/(s^2+1.2s+4)", [4.0], [1.0, 1.2, 4.0]),
    ("3 lags + dead time", "10 exp(-0.3s)/((s+1)(0.5s+1)(0.2s+1))", [10.0], [0.1, 0.8, 1.7, 1.0]),
    ("order 8, spread poles", "1/((s+1)(s+2)(s+3)(s+4)(s+5)(s+6)(s+7)(s+8))", [1.0],
     list(np.poly(-np.arange(1, 9)))),
    ("two delays", "(1 - exp(-s))/(s (s+1))", None, None),
    ("diffusion (non-rational)", "exp(-sqrt(s))/(s+1)", None, None),
]


def _best(fn, runs=20):
    best = float("inf")
    out = None
    for _ in range(runs):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def main(argv=None) -> int:
    from scipy import signal

    from ..engine import frequency
    w = np.geomspace(1e-2, 1e2, N)
    print(f"{N} frequencies, best of 20 runs")
    print(f"{'case':28s} {'model ms':>9s} {'engine ms':>10s} {'scipy ms':>9s} {'ratio':>7s} {'max |dB diff|':>14s}")
    for label, expr, num, den in CASES:
        t0 = time.perf_counter()
        m = frequency.build_model(expr)
        tm = time.perf_counter() - t0
        frequency.evaluate(m, w[:10])
        te, (F, _mag, db, _ph, _gd) = _best(lambda: frequency.evaluate(m, w))
        if num is None:
            print(f"{label:28s} {tm * 1e3:9.1f} {te * 1e3:10.2f} {'-':>9s} {'-':>7s} {'-':>14s}")
            continue

        def ref():
            _, h = signal.freqs(num, den, worN=w)
            if "dead time" in label:
                h = h * np.exp(-0.3j * w)
            return 20 * np.log10(np.abs(h)), np.unwrap(np.angle(h))
        ts, (rdb, _rph) = _best(ref)
        print(f"{label:28s} {tm * 1e3:9.1f} {te * 1e3:10.2f} {ts * 1e3:9.2f} {ts / te:6.2f}x "
              f"{np.max(np.abs(db - rdb)):14.1e}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
