"""Sampled responses: vectorised evaluation of f(t) on a grid or given times.

The closed form is evaluated piece by piece (each delayed piece only where
t >= its delay, so an unstable or growing term never overflows before it
starts).  Impulses (DiracDelta terms) are reported separately, never as
samples.  Without a closed form, Talbot's numerical inversion is used.
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import Mapping, Sequence

import numpy as np

from ..errors import ParameterError, SamplingError
from . import limits

MAX_POINTS = 1_000_000
INPUTS = ("impulse", "step", "ramp")


@dataclass(frozen=True)
class Impulse:
    """``weight * delta^(order)(t - time)``."""
    time: float
    order: int
    weight: float


@dataclass(frozen=True)
class Samples:
    t: np.ndarray
    y: np.ndarray
    impulses: tuple
    numerical: bool
    method: str
    #: numerical results only: largest relative difference between Talbot and de Hoog
    #: at the probe times (an estimate of the error); None for closed forms
    error_estimate: float | None = None

    def to_dict(self) -> dict:
        return {"t": [float(x) for x in self.t],
                "y": [None if not np.isfinite(v) else float(v) for v in self.y],
                "impulses": [{"time": i.time, "order": i.order, "weight": i.weight} for i in self.impulses],
                "method": self.method, "error_estimate": self.error_estimate}


def input_name(kind) -> str:
    """'impulse', 'step', 'ramp' or 'given' for an input argument."""
    if kind is None:
        return "impulse"
    if isinstance(kind, str):
        key = kind.strip().lower()
        if key in ("impulse", ""):
            return "impulse"
        if key in ("step", "ramp"):
            return key
    return "given"


def input_quasi(kind, params: Mapping | None = None):
    """U(s) as a Quasi (fast core), or None when it is outside the fast class."""
    from .quasi import Quasi
    from .fast import quasi_of
    name = input_name(kind)
    if name == "impulse":
        return Quasi.constant(1)
    if name == "step":
        return Quasi.s().inverse()
    if name == "ramp":
        return (Quasi.s() ** 2).inverse()
    return quasi_of(kind, params)


def response_result(expr, params: Mapping | None = None, input="impulse"):
    """The inverted response Y(s) = F(s) U(s): fast core first, the general route otherwise
    (memoised for text inputs: a result keeps its compiled evaluators and series windows)."""
    if isinstance(expr, str) and (input is None or isinstance(input, str)):
        return _response_cached(expr, None if params is None else dict(params), input)
    return _response_uncached(expr, params, input)


def _response_uncached(expr, params, input):
    from .fast import invert_quasi, quasi_of
    with limits.deadline(None):
        qF = quasi_of(expr, params)
        qU = input_quasi(input, params) if qF is not None else None
        if qF is not None and qU is not None:
            return invert_quasi(qF * qU)
        from .invert import invert_expr
        return invert_expr(response_expr(expr, params, input))


def _response_memo():
    from . import cache

    @cache.memo
    def cached(expr, params, input):
        return _response_uncached(expr, params, input)
    return cached


_response_cached = _response_memo()


def input_transform(kind, params: Mapping | None = None):
    """U(s) for a named input, or the given expression in s."""
    import sympy as sp
    from .._types import S
    from .invert import to_s_expr
    if kind is None:
        return sp.S.One
    if isinstance(kind, str):
        key = kind.strip().lower()
        if key in ("impulse", ""):
            return sp.S.One
        if key == "step":
            return 1 / S
        if key == "ramp":
            return 1 / S ** 2
        return to_s_expr(kind, params)
    return to_s_expr(kind, params)


def response_expr(expr, params=None, input="impulse"):
    """Y(s) = F(s) * U(s)."""
    from .invert import to_s_expr
    F = to_s_expr(expr, params)
    U = input_transform(input, params)
    return F * U


def time_grid(times: Sequence[float] | None = None, start=None, stop=None, n=None) -> np.ndarray:
    if times is not None:
        try:
            arr = np.asarray([float(x) for x in times], dtype=float)
        except (TypeError, ValueError) as exc:
            raise SamplingError(f"times must be numbers: {exc}") from exc
        if arr.size > MAX_POINTS:
            raise SamplingError(f"{arr.size} times is above the limit of {MAX_POINTS}")
        if not np.all(np.isfinite(arr)):
            raise SamplingError("times must be finite numbers")
        return arr
    if start is None or stop is None or n is None:
        raise SamplingError("give either a list of times or a start, a stop and a number of points")
    try:
        start, stop, n = float(start), float(stop), int(n)
    except (TypeError, ValueError) as exc:
        raise SamplingError(f"start, stop and n must be numbers: {exc}") from exc
    if not (np.isfinite(start) and np.isfinite(stop)):
        raise SamplingError("start and stop must be finite")
    if n < 1 or n > MAX_POINTS:
        raise SamplingError(f"the number of points must be between 1 and {MAX_POINTS}, got {n}")
    if stop < start:
        raise SamplingError(f"stop ({stop:g}) is before start ({start:g})")
    return np.linspace(start, stop, n)


def sample(expr, times=None, *, start=None, stop=None, n=None, input="impulse",
           params: Mapping | None = None) -> Samples:
    """Sample the response to ``input`` at ``times`` (or on a grid)."""
    grid = time_grid(times, start, stop, n)
    result = response_result(expr, params, input)
    with limits.deadline(None):
        return sample_result(result, grid)


def sample_result(result, grid: np.ndarray) -> Samples:
    if getattr(result, "is_fast", False):
        grid = np.asarray(grid, dtype=float)
        horizon = float(grid.max()) if grid.size else 0.0
        y = result.evaluator(horizon).values(grid)
        return Samples(grid, y, result.impulses(), False, result.method)
    if result.f_t is None:
        inv = result.numerical
        estimate = inv.verify(grid)
        y = inv.values(grid)
        return Samples(grid, y, (), True, result.method, estimate)
    _require_numbers(result.f_t)
    y = evaluate(result, grid)
    return Samples(grid, y, impulses_of(result.f_t), False, result.method)


def evaluate(result, grid: np.ndarray) -> np.ndarray:
    """f(t) at the grid (impulses excluded; zero for t < 0)."""
    grid = np.asarray(grid, dtype=float)
    y = np.zeros_like(grid)
    with np.errstate(all="ignore"):
        for start, f in samplers(result):
            mask = grid >= start
            if mask.any():
                y[mask] += f(grid[mask] - start if result.pieces else grid[mask])
    return y


def samplers(result) -> list:
    """[(start, numpy function)] of a closed-form result, compiled once per result:
    per delayed piece (a function of t - delay), or per delayed term of f(t)."""
    out = result.derived.get("samplers")
    if out is None:
        import sympy as sp
        from .invert import time_function
        if result.pieces:
            out = [(float(p.delay), numpy_function(sp.expand(p.gain) * time_function(p.decomposition)))
                   for p in result.pieces]
        else:
            out = [(start, numpy_function(term)) for start, term in delayed_terms(result.f_t)]
        result.derived["samplers"] = out
    return out


def delayed_terms(f) -> list[tuple[float, object]]:
    """f as [(start, term)]: each term is zero before its start (its Heaviside
    factors are dropped and the term is evaluated only from there on)."""
    import sympy as sp
    from .._types import T
    groups: dict[float, list] = {}
    for term in sp.Add.make_args(sp.expand(f, mul=True, multinomial=False, power_exp=False,
                                           power_base=False, log=False)):
        start = 0.0
        rest = []
        for factor in sp.Mul.make_args(term):
            if isinstance(factor, sp.Heaviside) and len(factor.args) >= 1:
                arg = sp.expand(factor.args[0])
                a = arg.coeff(T)
                b = arg - a * T
                if a.is_positive and not b.has(T) and b.is_number:
                    start = max(start, float(-b / a))
                    continue
            rest.append(factor)
        groups.setdefault(start, []).append(sp.Mul(*rest))
    return [(k, sp.Add(*v)) for k, v in sorted(groups.items())]


def _require_numbers(f):
    from .._types import T
    free = sorted(str(x) for x in f.free_symbols if x != T)
    if free:
        raise ParameterError(f"sampling needs values for {', '.join(free)}", free[0])


@lru_cache(maxsize=512)
def numpy_function(f):
    """A vectorised numpy function of t for f (DiracDelta dropped,
    Heaviside right-continuous)."""
    import sympy as sp
    from .._types import T
    f = f.replace(lambda e: isinstance(e, sp.DiracDelta), lambda e: sp.S.Zero)
    f = floats(f)           # exact 35-digit rationals inside sqrt() are not numpy numbers
    mods = [{"Heaviside": lambda x, *a: np.heaviside(x, 1.0)}, "scipy", "numpy"]
    fn = sp.lambdify(T, f, modules=mods)

    def call(t):
        out = fn(t)
        return np.broadcast_to(np.asarray(out, dtype=float), np.shape(t)).astype(float)
    return call


def floats(e):
    """Every numeric subexpression of e as a float (integers and integer
    exponents kept), ready for numpy."""
    import sympy as sp
    if e.is_Integer or e.is_Symbol:
        return e
    if e.is_number:
        v = sp.N(e, 17)
        return v if v.is_real else e
    if e.is_Pow and e.exp.is_Integer:
        return sp.Pow(floats(e.base), e.exp)
    return e.func(*[floats(a) for a in e.args])


def impulses_of(f) -> tuple:
    import sympy as sp
    from .._types import T
    out = []
    for term in sp.Add.make_args(sp.expand(f)):
        deltas = [d for d in term.atoms(sp.DiracDelta)]
        if not deltas:
            continue
        d = deltas[0]
        weight = term / d
        if weight.has(T):
            weight = weight.subs(T, sp.solve(d.args[0], T)[0])
        arg = d.args[0]
        when = float(sp.solve(arg, T)[0])
        order = int(d.args[1]) if len(d.args) > 1 else 0
        out.append(Impulse(when, order, float(weight)))
    return tuple(sorted(out, key=lambda i: (i.time, i.order)))
