"""Speed benchmark: ``sheetfuncs.invert`` against ``sympy.inverse_laplace_transform``.

Run as ``python -m sheetfuncs.benchmarks.engine [--quick] [--limit SECONDS] [--json PATH]
[--corpus PATH]``.  One process, caches off (``SHEETFUNCS_CACHE=off`` is set
here if it was not, and SymPy's own cache is cleared before every timed call).

Per case: the engine's best of 3 runs of ``invert()`` and its JSON form
(parsing and ``json.dumps(result.to_dict())`` included, sampling excluded), the reference once under a time limit (SIGALRM in the main
thread; a timeout makes the ratio a lower bound), the ratio reference/engine,
and the agreement: max |f_engine - f_reference| at 6 times t > 0, divided by
max |f_reference| there.  Cases without exp(-sT) are also cross-checked with
mpmath's Talbot inversion (50 digits); that check stands in for the
agreement when the reference gives no result.
"""
from __future__ import annotations

import os

def _cache_off() -> str:
    """Switch the result caches off for this process (only when run as the benchmark,
    never on import); returns the note to print."""
    if os.environ.get("SHEETFUNCS_CACHE", "on").strip().lower() not in ("off", "0", "no", "false"):
        os.environ["SHEETFUNCS_CACHE"] = "off"
        return "note: SHEETFUNCS_CACHE was not 'off'; the benchmark set it to 'off' for this run"
    return ""

import argparse  # noqa: E402
import contextlib  # noqa: E402
import datetime  # noqa: E402
import gc  # noqa: E402
import json  # noqa: E402
import platform  # noqa: E402
import signal  # noqa: E402
import statistics  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from dataclasses import dataclass  # noqa: E402
from pathlib import Path  # noqa: E402

import mpmath  # noqa: E402
import numpy as np  # noqa: E402
import sympy as sp  # noqa: E402
from sympy.core.cache import clear_cache  # noqa: E402

import sheetfuncs  # noqa: E402
from sheetfuncs._types import S, T  # noqa: E402
from sheetfuncs.engine import cache as _cache  # noqa: E402
from sheetfuncs.engine.sample import numpy_function, sample_result  # noqa: E402
from sheetfuncs.errors import SheetfuncsError  # noqa: E402

DEFAULT_CORPUS = Path(__file__).resolve().parents[2] / "bench" / "corpus.txt"
DEFAULT_LIMIT = 60.0
QUICK_LIMIT = 20.0
QUICK_CASES = 2
ENGINE_RUNS = 3
TOLERANCE = 1e-9
ENGINE_TARGET_S = 0.020
RATIO_TARGET = 100.0
DIGITS = 30
MP_DIGITS = 50   # Talbot loses digits on lightly damped modes at late times at 30


@dataclass(frozen=True)
class Case:
    label: str
    text: str


class ReferenceTimeout(BaseException):
    """Raised by the alarm; a BaseException so SymPy's ``except Exception`` cannot swallow it."""


def read_corpus(path=DEFAULT_CORPUS) -> list[Case]:
    """Cases from ``label | expression`` lines (``#`` comments, blank lines ignored)."""
    cases = []
    for n, line in enumerate(Path(path).read_text(encoding="utf-8").splitlines(), 1):
        line = line.strip()
        if not line or line.startswith("#"):
            continue
        label, sep, text = line.partition("|")
        if not sep or not label.strip() or not text.strip():
            raise SheetfuncsError(f"{path}, line {n}: expected 'label | expression'")
        cases.append(Case(label.strip(), text.strip()))
    return cases


@contextlib.contextmanager
def time_limit(seconds: float):
    """Raise ReferenceTimeout in the main thread after ``seconds`` (then every second)."""
    if not seconds or not hasattr(signal, "SIGALRM"):
        yield
        return

    def expired(signum, frame):
        raise ReferenceTimeout()

    previous = signal.signal(signal.SIGALRM, expired)
    signal.setitimer(signal.ITIMER_REAL, seconds, 1.0)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


def check_times(F: sp.Expr) -> np.ndarray:
    """6 times t > 0 spanning the fastest to the slowest pole (and the delays)."""
    shifts = {e: sp.Dummy() for e in F.atoms(sp.exp) if e.has(S)}
    _, den = sp.fraction(sp.together(F.xreplace(shifts)))
    coeffs = [complex(c) for c in sp.Poly(den, S).all_coeffs()]
    mags = [abs(p) for p in np.roots(coeffs)] if len(coeffs) > 1 else []
    mags = [m for m in mags if m > 1e-9] or [1.0]
    delays = sorted({float(-e.args[0].coeff(S)) for e in F.atoms(sp.exp) if e.args[0].has(S)} | {0.0})
    times = np.geomspace(0.3 / max(mags), delays[-1] + 4.0 / min(mags), 6)
    for d in delays:  # keep off the jumps at the delays
        times = np.where(np.abs(times - d) < 1e-6 * max(1.0, d), times + 1e-3 * max(1.0, d), times)
    return times


def time_engine(text: str, runs: int = ENGINE_RUNS):
    """Best time of ``runs`` cold calls of ``sheetfuncs.invert`` and the last result."""
    best, result = float("inf"), None
    gc.collect()            # once, not before every run: a full collection just before a
    for _ in range(runs):   # sub-millisecond call evicts the CPU caches and doubles its time
        clear_cache()
        numpy_function.cache_clear()
        t0 = time.perf_counter()
        result = sheetfuncs.invert(text)
        json.dumps(result.to_dict())
        best = min(best, time.perf_counter() - t0)
    return best, result


def time_reference(F: sp.Expr, limit: float):
    """(seconds, f(t) or None, status) of one call of sympy.inverse_laplace_transform."""
    clear_cache()
    gc.collect()
    t0 = time.perf_counter()
    try:
        with time_limit(limit):
            f = sp.inverse_laplace_transform(F, S, T)
    except ReferenceTimeout:
        return time.perf_counter() - t0, None, "timeout"
    except Exception as exc:  # the reference failing is a result, not a crash
        return time.perf_counter() - t0, None, f"error: {type(exc).__name__}: {exc}"[:120]
    elapsed = time.perf_counter() - t0
    if f.has(sp.InverseLaplaceTransform):
        return elapsed, None, "unevaluated"
    if limit and elapsed > limit:
        return elapsed, None, "timeout"
    return elapsed, f, "ok"


def values_of(f: sp.Expr, times, limit: float | None = None) -> np.ndarray:
    """f(t) at each time with SymPy (substitute, doit, N with DIGITS digits)."""
    out = []
    with time_limit(limit or 0):
        for t in times:
            v = sp.N(f.subs(T, sp.Float(float(t), DIGITS)).doit(), DIGITS)
            v = complex(v)
            if abs(v.imag) > 1e-12 * max(1.0, abs(v.real)):
                raise ValueError(f"complex value {v} at t={t:g}")
            out.append(v.real)
    return np.array(out)


def mpmath_values(F: sp.Expr, times) -> np.ndarray | None:
    """f(t) by mpmath's Talbot inversion (MP_DIGITS digits); None for delayed F."""
    if F.has(sp.exp):
        return None
    fn = sp.lambdify(S, F, "mpmath")
    with mpmath.workdps(MP_DIGITS):
        return np.array([float(mpmath.invertlaplace(fn, float(t), method="talbot")) for t in times])


def relative_gap(a: np.ndarray, b: np.ndarray) -> float:
    scale = max(float(np.max(np.abs(b))), float(np.max(np.abs(a))), 1e-300)
    return float(np.max(np.abs(a - b))) / scale


def run_case(case: Case, limit: float) -> dict:
    row = {"label": case.label, "expression": case.text}
    try:
        F = sheetfuncs.parse(case.text)
        row["engine_s"], result = time_engine(case.text)
        row["method"] = result.method
        times = check_times(F)
        row["times"] = [float(t) for t in times]
        eng = sample_result(result, times).y
    except Exception as exc:  # an engine failure is a result of the benchmark
        row.update(engine_s=None, status="engine error", ratio=None, agreement=None,
                   error=f"{type(exc).__name__}: {exc}")
        return row
    row["engine_values"] = [float(v) for v in eng]
    ref_s, f_ref, status = time_reference(F, limit)
    row.update(reference_s=ref_s, status=status)
    row["ratio"] = (limit if status == "timeout" else ref_s) / row["engine_s"]
    row["ratio_is_lower_bound"] = status == "timeout"
    row["agreement"] = row["agreement_source"] = None
    if f_ref is not None:
        try:
            ref = values_of(f_ref, times, limit)
            row["reference_values"] = [float(v) for v in ref]
            row["agreement"], row["agreement_source"] = relative_gap(eng, ref), "sympy"
        except ReferenceTimeout:
            row["status"] = "ok (evaluation timeout)"
        except Exception as exc:
            row["status"] = f"ok (evaluation failed: {type(exc).__name__})"
    try:
        mp_vals = mpmath_values(F, times)
    except Exception:  # a failed cross-check is reported as missing
        mp_vals = None
    row["mpmath_gap"] = None if mp_vals is None else relative_gap(eng, mp_vals)
    if row["agreement"] is None and row["mpmath_gap"] is not None:
        row["agreement"], row["agreement_source"] = row["mpmath_gap"], "mpmath"
    if row["agreement"] is not None and row["agreement"] > TOLERANCE and result.f_t is not None:
        try:  # is the gap in the formula, or only float64 rounding in the sampling?
            exact = values_of(result.f_t, times, limit)
            row["engine_formula_gap"] = relative_gap(exact, np.array(row.get("reference_values") or mp_vals))
        except (ReferenceTimeout, Exception):
            row["engine_formula_gap"] = None
    return row


def machine() -> dict:
    cpu = platform.processor() or ""
    with contextlib.suppress(OSError):
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    return {"date": datetime.date.today().isoformat(), "python": platform.python_version(),
            "implementation": platform.python_implementation(), "platform": platform.platform(),
            "cpu": cpu, "cores": os.cpu_count(), "sympy": sp.__version__, "numpy": np.__version__,
            "mpmath": mpmath.__version__, "sheetfuncs": sheetfuncs.__version__,
            "load_average": list(os.getloadavg()) if hasattr(os, "getloadavg") else None}


def summarize(rows: list[dict], limit: float) -> dict:
    timed = [r for r in rows if r.get("engine_s") is not None]
    ratios = [r["ratio"] for r in timed if r["status"] in ("timeout",) or r["status"].startswith("ok")]
    slow = max(timed, key=lambda r: r["engine_s"]) if timed else None
    bad = [r for r in rows if r.get("agreement") is None or r["agreement"] > TOLERANCE]
    return {
        "cases": len(rows),
        "median_ratio": statistics.median(ratios) if ratios else None,
        "median_is_lower_bound": any(r["status"] == "timeout" for r in timed),
        "ratio_cases": len(ratios),
        "reference_timeouts": sum(r["status"] == "timeout" for r in timed),
        "reference_failures": [r["label"] for r in timed
                               if r["status"] != "timeout" and not r["status"].startswith("ok")],
        "slowest_engine": None if slow is None else {"label": slow["label"], "seconds": slow["engine_s"]},
        "engine_over_target": [r["label"] for r in timed if r["engine_s"] >= ENGINE_TARGET_S],
        "engine_errors": [r["label"] for r in rows if r.get("engine_s") is None],
        "not_agreeing": [{"label": r["label"], "expression": r["expression"],
                          "agreement": r.get("agreement"), "source": r.get("agreement_source"),
                          "mpmath_gap": r.get("mpmath_gap"),
                          "engine_formula_gap": r.get("engine_formula_gap")} for r in bad],
        "limit_s": limit,
    }


def _fmt_row(i: int, r: dict) -> str:
    eng = "error" if r.get("engine_s") is None else f"{r['engine_s'] * 1e3:9.2f}"
    if r.get("engine_s") is None:
        return f"{i:>3}  {r['label']:<28} {eng:>9}  {r.get('error', '')}"
    st = r["status"]
    ref = f">{r['reference_s']:.0f} (timeout)" if st == "timeout" else f"{r['reference_s']:.3f}"
    ratio = ("≥" if r["ratio_is_lower_bound"] else "") + f"{r['ratio']:.0f}x"
    agr = "n/a" if r["agreement"] is None else f"{r['agreement']:.1e}"
    agr += "*" if r["agreement_source"] == "mpmath" else " "
    mpg = "-" if r.get("mpmath_gap") is None else f"{r['mpmath_gap']:.1e}"
    note = "" if st in ("ok", "timeout") else f"  [{st}]"
    return f"{i:>3}  {r['label']:<28} {eng:>9}  {ref:>15}  {ratio:>8}  {agr:>9}  {mpg:>9}{note}"


def report(rows: list[dict], summary: dict, info: dict) -> str:
    lines = [f"sheetfuncs {info['sheetfuncs']} vs sympy.inverse_laplace_transform, {info['date']}",
             f"machine: {info['cpu']}, {info['cores']} cores; Python {info['python']}; "
             f"sympy {info['sympy']}, numpy {info['numpy']}, mpmath {info['mpmath']}",
             f"engine: best of {ENGINE_RUNS} cold calls; reference: one call, limit {summary['limit_s']:g} s"
             + ("" if not info.get("load_average") else
                "; load average at start {:.2f} {:.2f} {:.2f}".format(*info["load_average"])),
             "", f"{'#':>3}  {'case':<28} {'engine ms':>9}  {'reference s':>15}  {'ratio':>8}  {'agreement':>9}  {'vs mpmath':>9}",
             "-" * 95]
    lines += [_fmt_row(i, r) for i, r in enumerate(rows, 1)]
    med = summary["median_ratio"]
    lines += ["-" * 95,
              "legend: agreement = max |f_engine - f_sympy| / max |f_sympy| at 6 times t > 0 "
              "(* = vs mpmath Talbot, the reference gave no result);",
              "vs mpmath: the same against mpmath Talbot at 50 digits (- = delayed case, not run)",
              "median ratio (reference/engine): " + ("n/a" if med is None else
              ("≥" if summary["median_is_lower_bound"] else "") + f"{med:.0f}x") +
              f" over {summary['ratio_cases']} cases (timeouts counted at the limit); "
              f"target ≥{RATIO_TARGET:.0f}x",
              f"reference timeouts: {summary['reference_timeouts']}; reference without a result: "
              + (", ".join(summary["reference_failures"]) or "none")]
    if summary["slowest_engine"]:
        s = summary["slowest_engine"]
        lines.append(f"slowest engine case: {s['label']} {s['seconds'] * 1e3:.1f} ms; "
                     f"cases at or over {ENGINE_TARGET_S * 1e3:.0f} ms: "
                     + (", ".join(summary["engine_over_target"]) or "none"))
    if summary["engine_errors"]:
        lines.append("engine errors: " + ", ".join(summary["engine_errors"]))
    if summary["not_agreeing"]:
        lines.append(f"agreement worse than {TOLERANCE:g} or not checked:")
        for d in summary["not_agreeing"]:
            gap = "n/a" if d["agreement"] is None else f"{d['agreement']:.2e} ({d['source']})"
            extra = ("" if d.get("mpmath_gap") is None or d["source"] == "mpmath"
                     else f"; engine vs mpmath Talbot: {d['mpmath_gap']:.2e}")
            extra += ("" if d.get("engine_formula_gap") is None
                      else f"; engine f(t) at {DIGITS} digits vs the reference: {d['engine_formula_gap']:.2e}")
            lines.append(f"  {d['label']}: {d['expression']}  gap {gap}{extra}")
    else:
        lines.append(f"agreement: every case within {TOLERANCE:g}")
    return "\n".join(lines)


def _wall(cmd: list[str], runs: int = 7) -> float:
    import subprocess
    best = float("inf")
    env = dict(os.environ, SHEETFUNCS_CACHE="off")
    for _ in range(runs):
        t0 = time.perf_counter()
        subprocess.run(cmd, capture_output=True, env=env, check=True)
        best = min(best, time.perf_counter() - t0)
    return best


def startup() -> dict:
    """Best wall times of fresh processes: 'import sympy', 'sheetfuncs --version' and
    'sheetfuncs invert 1/(s+1) --json' (the command line as the console script runs it)."""
    py = sys.executable
    return {"import_sympy": _wall([py, "-c", "import sympy"]),
            "python_bare": _wall([py, "-c", "pass"]),
            "version": _wall([py, "-m", "sheetfuncs.cli", "--version"]),
            "invert_json": _wall([py, "-m", "sheetfuncs.cli", "invert", "1/(s+1)", "--json"])}


def startup_report(d: dict) -> str:
    ref = d["import_sympy"]
    return "\n".join([
        "start-up, best of 7 fresh processes (wall time):",
        f"  python -c pass                  {d['python_bare'] * 1e3:7.1f} ms",
        f"  python -c 'import sympy'        {ref * 1e3:7.1f} ms  (reference)",
        f"  sheetfuncs --version            {d['version'] * 1e3:7.1f} ms  = {d['version'] / ref:.2f} x "
        "import sympy (target <= 0.30)",
        f"  sheetfuncs invert 1/(s+1) --json{d['invert_json'] * 1e3:7.1f} ms  = "
        f"{d['invert_json'] / ref:.2f} x import sympy (target <= 0.50)"])


def _warm_up():
    """Load the lazily imported parts of both sides on an expression not in the corpus."""
    sheetfuncs.invert("1/(s+7)")
    sample_result(sheetfuncs.invert("1/(s+7)"), np.array([1.0]))
    sp.inverse_laplace_transform(1 / (S + 7), S, T)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(prog="python -m sheetfuncs.benchmarks.engine", description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true",
                    help=f"only the first {QUICK_CASES} cases, reference limit {QUICK_LIMIT:g} s")
    ap.add_argument("--limit", type=float, default=None, metavar="SECONDS",
                    help=f"time limit per reference call (default {DEFAULT_LIMIT:g})")
    ap.add_argument("--json", default=None, metavar="PATH", help="also write the results as JSON")
    ap.add_argument("--corpus", default=str(DEFAULT_CORPUS), metavar="PATH", help="corpus file")
    ap.add_argument("--startup", action="store_true",
                    help="only time the command's start-up against 'import sympy'")
    args = ap.parse_args(argv)
    if args.startup:
        print(startup_report(startup()))
        return 0
    if args.limit is not None and args.limit <= 0:
        ap.error("--limit must be a positive number of seconds")
    try:
        cases = read_corpus(args.corpus)
    except (OSError, SheetfuncsError) as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    limit = args.limit if args.limit is not None else (QUICK_LIMIT if args.quick else DEFAULT_LIMIT)
    if args.quick:
        cases = cases[:QUICK_CASES]
    note = _cache_off()
    if note:
        print(note)
    if _cache.enabled():
        print("error: the sheetfuncs cache is still on", file=sys.stderr)
        return 2
    if not hasattr(signal, "SIGALRM"):
        print("note: no SIGALRM here, so reference calls run without a time limit")
    _warm_up()
    info = machine()
    rows = []
    for i, case in enumerate(cases, 1):
        rows.append(run_case(case, limit))
        print(_fmt_row(i, rows[-1]), file=sys.stderr, flush=True)
    summary = summarize(rows, limit)
    print()
    print(report(rows, summary, info))
    if args.json:
        Path(args.json).write_text(json.dumps({"machine": info, "summary": summary, "cases": rows},
                                              indent=1), encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
