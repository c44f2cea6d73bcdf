"""Human-readable text of results for the command line: aligned tables."""
from __future__ import annotations

import sympy as sp

from .engine.results import number, pair


def _g(x, digits=6):
    if x is None:
        return "-"
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, str):
        return x
    return f"{x:.{digits}g}"


def complex_text(z, digits=6) -> str:
    """``[re, im]`` as text: '-1 + 2j', '0.5', or symbolic parts as they are."""
    re, im = z
    if isinstance(re, str) or isinstance(im, str):
        return f"{re} + ({im})j" if im not in (0, 0.0, "0") else str(re)
    if abs(im) < 1e-300:
        return _g(re, digits)
    sign = "+" if im >= 0 else "-"
    return f"{_g(re, digits)} {sign} {_g(abs(im), digits)}j"


def table(headers, rows) -> str:
    cols = [list(map(str, col)) for col in zip(headers, *rows)] if rows else [[h] for h in headers]
    widths = [max(len(x) for x in col) for col in cols]
    lines = ["  ".join(h.ljust(w) for h, w in zip(headers, widths)).rstrip(),
             "  ".join("-" * w for w in widths)]
    for row in rows:
        lines.append("  ".join(str(x).ljust(w) for x, w in zip(row, widths)).rstrip())
    return "\n".join(lines)


def inversion(res, d, digits=6) -> str:
    from .printing import to_display
    out = [f"F(s)   = {sp.sstr(res.expr)}",
           f"f(t)   = {to_display(res.f_t, digits=digits) if res.f_t is not None else '(numerical only)'}"
           + ("   for t >= 0" if res.f_t is not None else ""),
           f"method : {res.method}"]
    if res.terms:
        rows = [(complex_text(pair(t.pole), digits), t.order, complex_text(pair(t.coefficient), digits)) for t in res.terms]
        out += ["", "partial fractions  F(s) = sum coefficient/(s - pole)^order", table(("pole", "order", "coefficient"), rows)]
    if res.real_terms:
        rows = [(sp.sstr(r.numerator), f"({sp.sstr(r.base)})^{r.power}" if r.power > 1 else f"({sp.sstr(r.base)})")
                for r in res.real_terms]
        out += ["", "real form", table(("numerator", "denominator"), rows)]
    if res.direct:
        out += ["", "direct part (impulses): " + " + ".join(
            f"{_g(number(c), digits)}*s^{i}" for i, c in enumerate(res.direct) if c != 0)]
    if "check" in d:
        ck = d["check"]
        out += ["", f"self-check vs Talbot at t = {', '.join(_g(t, 4) for t in ck['times'])}: "
                    f"max deviation {ck['max_abs_deviation']:.2e} (relative {ck['max_rel_deviation']:.2e})"]
    if "excel" in d:
        out += ["", "spreadsheet formula: " + d["excel"]]
    if "latex" in d:
        out += ["", "LaTeX: " + d["latex"]]
    return "\n".join(out)


def samples(res, digits=6) -> str:
    rows = [(_g(float(t), digits), _g(float(y), digits)) for t, y in zip(res.t, res.y)]
    out = [table(("t", "y"), rows)]
    if res.impulses:
        out.append("impulses (not in y): " + ", ".join(
            f"{_g(i.weight, digits)}*delta{'^(%d)' % i.order if i.order else ''}(t - {_g(i.time, digits)})"
            for i in res.impulses))
    if res.numerical:
        est = f"; Talbot vs de Hoog differ by {res.error_estimate:.1e} (relative)" \
            if res.error_estimate is not None else ""
        out.append(f"values by {res.method}{est}")
    return "\n".join(out)


def figures(f, digits=6) -> str:
    rows = [(complex_text((p.pole.real, p.pole.imag), digits), p.multiplicity, _g(p.damping_ratio, digits),
             _g(p.natural_frequency, digits), _g(p.time_constant, digits)) for p in f.poles]
    out = [table(("pole", "mult.", "damping ratio", "natural freq. (rad/s)", "time constant"), rows), "",
           f"stability      : {f.stability}"]
    items = [("DC gain", f.dc_gain), ("initial value", f.initial_value), ("final value", f.final_value)]
    if f.input == "step":
        lo, hi = f.rise_band
        items += [(f"rise time ({lo:.0%}-{hi:.0%})", f.rise_time), ("peak time", f.peak_time),
                  ("peak value", f.peak_value), ("overshoot (%)", f.overshoot_percent),
                  (f"settling time ({f.settling_band:.0%})", f.settling_time)]
    w = max(len(k) for k, _ in items)
    out += [f"{k.ljust(w)} : {_g(v, digits)}" for k, v in items]
    if f.final_value_note:
        out.append(f"note: {f.final_value_note}")
    out += [f"note: {n}" for n in f.notes]
    out.append(f"(response to a {f.input} input)")
    return "\n".join(out)


def ode(sol, digits=6) -> str:
    from .printing import to_display

    def show(r):
        return to_display(r.f_t, digits=digits) if r.f_t is not None else "(numerical only)"
    return "\n".join([f"Y(s)        = {sp.sstr(sol.Y_s)}",
                      f"y(t)        = {show(sol.y)}   for t >= 0",
                      f"free part   = {show(sol.free)}   (from the initial conditions)",
                      f"forced part = {show(sol.forced)}   (from the input)"])
